"""``DataFrame.pfx``: the panelfx functions as methods, for notebooks and method chains.

Registered when :mod:`panelfx` is imported.  Every method delegates to the function of
the same name, so the results are identical:

- ``df.pfx.derive(*transforms, id=, time=, ...)`` is :func:`panelfx.derive`, every option included;
- ``df.pfx.check(id=, time=, ...)`` is :func:`panelfx.check`;
- ``df.pfx.apply(derivation)`` is :meth:`panelfx.Derivation.apply` (a derivation, or
  the path of a saved one);
- ``df.pfx.dictionary()`` and ``df.pfx.derivation`` read back the provenance that
  ``apply`` recorded in ``df.attrs["panelfx"]``.

>>> import pandas as pd, panelfx as pfx
>>> df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 14, 0], "sbp": [150.0, 142.0, 138.0]})
>>> out = df.pfx.apply(pfx.Derivation(pfx.change_from_baseline("sbp"), id="pid", time="day"))
>>> out
   pid  day    sbp  sbp_change
0    1    0  150.0         0.0
1    1   14  142.0        -8.0
2    2    0  138.0         0.0
>>> out.pfx.dictionary()[["column", "transform", "sources", "dtype"]]
       column             transform sources    dtype
0  sbp_change  change_from_baseline     sbp  float64
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from typing import Any

import pandas as pd

from ._transform import Transform
from .errors import OptionError

#: The accessor's name: ``frame.pfx``, like the usual ``import panelfx as pfx``.
NAME = "pfx"


class PanelAccessor:
    """panelfx methods on a DataFrame (``frame.pfx``)."""

    def __init__(self, frame: pd.DataFrame) -> None:
        self._frame = frame

    def derive(self, *transforms: Transform, id: str | Sequence[str], time: str, **options: Any) -> pd.DataFrame:
        """:func:`panelfx.derive` on this frame, with the same options (``unit=``, ``order=``,
        ``time_unit=``, ``tables=``, ``keep=``, ``rows=``, ``threads=``)."""
        from .derive import derive

        return derive(self._frame, *transforms, id=id, time=time, **options)

    def check(self, *, id: str | Sequence[str], time: str, spacing: Any = None, tolerance: Any = None,
              notes: bool = False, **plan: Any) -> pd.DataFrame:
        """:func:`panelfx.check` on this frame (``schedule=``, ``windows=``, ``day=`` as there)."""
        from .check import check

        return check(self._frame, id=id, time=time, spacing=spacing, tolerance=tolerance, notes=notes, **plan)

    def apply(self, derivation: Any, tables: Mapping[str, pd.DataFrame] | None = None, **options: Any) -> pd.DataFrame:
        """Apply a :class:`~panelfx.Derivation` (or the path of a saved one) to this frame, with the
        options of :meth:`~panelfx.Derivation.apply` (``keep=``, ``rows=``, ``threads=``)."""
        from .derivation import Derivation

        if isinstance(derivation, (str, os.PathLike)):
            derivation = Derivation.load(derivation)
        if not isinstance(derivation, Derivation):
            raise OptionError(f"apply needs a panelfx.Derivation or the path of a saved one, "
                              f"got {type(derivation).__name__}")
        return derivation.apply(self._frame, tables, **options)

    @property
    def provenance(self) -> dict[str, Any]:
        """What ``Derivation.apply`` recorded on this frame (``frame.attrs["panelfx"]``)."""
        from .derivation import ATTRS_KEY

        record = self._frame.attrs.get(ATTRS_KEY)
        if not isinstance(record, dict) or "derivation" not in record:
            raise OptionError("this frame carries no panelfx provenance: it was not made by Derivation.apply "
                              "(or an operation since then dropped frame.attrs)")
        return record

    @property
    def derivation(self) -> Any:
        """The :class:`~panelfx.Derivation` that made this frame's derived columns."""
        from .derivation import Derivation

        return Derivation.from_dict(self.provenance["derivation"])

    def dictionary(self) -> pd.DataFrame:
        """The data dictionary recorded by ``apply``: one row per derived column, with the
        dtypes of the result (see :meth:`panelfx.Derivation.dictionary`)."""
        from .derivation import dictionary_frame

        return dictionary_frame(self.provenance["dictionary"])


pd.api.extensions.register_dataframe_accessor(NAME)(PanelAccessor)
