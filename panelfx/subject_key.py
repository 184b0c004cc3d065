"""``subject_key``: one integer column for a subject id made of several columns."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from ._frames import frames
from ._options import checked_options
from ._panel import as_id_list, key_column, require_columns
from .errors import NullKeyError, OptionError, rows_message

__all__ = ["subject_key"]


@checked_options
@frames(result="none")
def subject_key(frame: pd.DataFrame, id: str | Sequence[str], *, name: str = "subject_key") -> pd.Series:
    """One int64 code per subject, for models that take a single grouping column.

    statsmodels' ``groups=`` (GEE, MixedLM) and scikit-learn's ``GroupKFold(groups=)`` take
    one column, while subject numbers often restart at every site (``id=["site",
    "subject"]``).  The codes are 0, 1, ... in **sorted order of the id values** (the first
    column first), so the same frame gives the same codes whatever its row order; a subset
    with fewer subjects is numbered afresh.  ``id`` may name index levels.  The result has
    the frame's index and is named ``name``.  A polars DataFrame or pyarrow Table is read as the
    other functions read it; the key is then a pandas Series over row numbers 0, 1, ... (its
    ``to_numpy()`` goes straight into ``groups=``).

    Missing values: a missing id value raises :class:`~panelfx.NullKeyError` (a subject
    cannot be told apart from another).

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"site": ["B", "A", "B", "A", "A"], "subject": [1, 1, 1, 2, 1],
    ...                    "day": [0, 0, 30, 0, 30]})
    >>> df.assign(key=pfx.subject_key(df, id=["site", "subject"], name="key"))
      site  subject  day  key
    0    B        1    0    2
    1    A        1    0    0
    2    B        1   30    2
    3    A        2    0    1
    4    A        1   30    0
    """
    if not isinstance(name, str) or not name:
        raise OptionError(f"name must be a non-empty string, got {name!r}")
    ids = as_id_list(id)
    require_columns(frame, ids, "id", levels=True)
    codes: np.ndarray | None = None
    for col in ids:
        values = key_column(frame, col)
        missing = values.isna().to_numpy()
        if missing.any():
            bad = list(frame.index[missing])
            raise NullKeyError(rows_message("missing subject id", col, len(bad), bad, noun="row labels"),
                               column=col, count=len(bad), ids=bad)
        part, uniques = pd.factorize(values, sort=True)  # mixed numbers and text: numbers first (pandas)
        part = part.astype(np.int64, copy=False)
        # mixed radix over sorted codes keeps the lexicographic order; re-ranking after each
        # column keeps the codes below the number of rows, so any number of columns fits
        codes = part if codes is None else pd.factorize(codes * len(uniques) + part, sort=True)[0].astype(np.int64)
    assert codes is not None
    return pd.Series(codes, index=frame.index, name=name)
