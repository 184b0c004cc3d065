"""``derive``: run transforms over one shared ordering of the panel."""

from __future__ import annotations

from typing import Sequence

import pandas as pd

from ._panel import Panel
from ._transform import Transform
from .errors import ColumnExistsError, MissingColumnError, OptionError


def plan(columns: Sequence[str], transforms: Sequence[Transform], id_cols: Sequence[str], time: str) -> list[str]:
    """Check, before anything is computed, that every transform finds its inputs (in the
    frame or made by an earlier transform) and that no output overwrites a column.
    Returns the output names in order."""
    available = set(columns)
    made: list[str] = []
    for i, tr in enumerate(transforms):
        if not isinstance(tr, Transform):
            raise OptionError(
                f"transform #{i + 1} is a {type(tr).__name__}, not a panelfx transform "
                f"(build one with e.g. panelfx.baseline('col'))"
            )
        for col in tr.inputs():
            if col not in available:
                later = " (it is made by a later transform: reorder them)" if any(
                    col in t.outputs() for t in transforms[i + 1:]) else ""
                raise MissingColumnError(
                    f"column {col!r} needed by transform #{i + 1} ({tr.type_name}) is not in the frame{later}",
                    column=col, count=1,
                )
            if col in (*id_cols, time):
                raise OptionError(f"transform #{i + 1} ({tr.type_name}) uses the id or time column {col!r} as a value")
        for out in tr.outputs():
            if out in available:
                source = "made by an earlier transform" if out in made else "already in the frame"
                raise ColumnExistsError(
                    f"output column {out!r} of transform #{i + 1} ({tr.type_name}) is {source}; "
                    f"choose another with name=",
                    column=out, count=1,
                )
            available.add(out)
            made.append(out)
    return made


def derive(
    frame: pd.DataFrame,
    *transforms: Transform,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
) -> pd.DataFrame:
    """Add the derived columns of ``transforms`` to a copy of ``frame``.

    The result has every input column unchanged, then one column per output in the order
    the transforms were given, with the input's index and row order (even when the input
    is not sorted).  The input is never modified.  The panel is validated and ordered
    once for all transforms; input already grouped by subject and in time order is not
    re-sorted.  A transform may use a column made by an earlier one.

    ``id`` names the subject column, or several (e.g. ``["site", "subject"]``); ``time``
    the occasion time, numbers or datetimes.  ``unit`` (datetime times only; default
    ``"D"``, days) is the unit of derived durations, rates and areas.

    Raises :class:`~panelfx.PanelError` subclasses on bad input: a missing column, a
    missing id or time, duplicate (id, time), a time column of text, text where numbers
    are needed, or an output name that already exists.

    >>> import pandas as pd, panelfx as px
    >>> df = pd.DataFrame({"pid": [2, 1, 1], "day": [0, 7, 0], "hb": [13.1, 12.0, 12.5]},
    ...                   index=["r1", "r2", "r3"])
    >>> df.pipe(px.derive, px.lag("hb"), px.change_from_baseline("hb"), id="pid", time="day")
        pid  day    hb  hb_lag1  hb_change
    r1    2    0  13.1      NaN        0.0
    r2    1    7  12.0     12.5       -0.5
    r3    1    0  12.5      NaN        0.0
    """
    panel = Panel(frame, id=id, time=time, unit=unit)
    names = plan(list(frame.columns), transforms, panel.id_cols, panel.time_col)
    new: dict[str, object] = {}
    for tr in transforms:
        values = tr.compute(panel)
        for name, v in zip(tr.outputs(), values):
            s = pd.Series(v, index=frame.index, name=name, copy=False)
            new[name] = s
            panel.add_column(name, s)
    assert list(new) == names
    # Under copy-on-write (pandas 3) a shallow copy cannot leak changes back to the input.
    out = frame.copy(deep=not _copy_on_write())
    for name, s in new.items():
        out[name] = s
    return out


def _copy_on_write() -> bool:
    if int(pd.__version__.split(".")[0]) >= 3:
        return True
    return bool(pd.get_option("mode.copy_on_write"))


__all__ = ["derive"]
