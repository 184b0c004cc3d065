"""Cumulative exposure: running sum, dose-rate x duration integral, or area under the curve."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .. import _kernels as K
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_choice, check_column_name, check_name
from ._common import check_where, sources, where_words, with_where
from ._spans import check_span, span_words

METHODS = {"sum": "cum", "step": "cum_step", "trapezoid": "auc"}
MISSING = ("skip", "propagate")


@dataclasses.dataclass(frozen=True, kw_only=True)
class Cumulative(Transform):
    """Configured :func:`cumulative`."""

    type_name = "cumulative"
    col: str
    method: Literal["sum", "step", "trapezoid"] = "sum"
    restart_after: str | float | None = None
    missing: Literal["skip", "propagate"] = "skip"
    where: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_choice("method", self.method, list(METHODS))
        check_choice("missing", self.missing, MISSING)
        check_where(self.where)
        if self.restart_after is not None:
            object.__setattr__(self, "restart_after", check_span("restart_after", self.restart_after))

    def inputs(self) -> tuple[str, ...]:
        return with_where((self.col,), self.where)

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_{METHODS[self.method]}",)

    @property
    def past_only(self) -> bool:
        return True

    def describe(self) -> str:
        what = {
            "sum": f"running sum of {self.col!r} over the subject's occasions",
            "step": f"running integral of {self.col!r} held constant until the next occasion "
                    f"(sum of previous value x time since previous occasion)",
            "trapezoid": f"running area under the piecewise-linear curve of {self.col!r} from the first occasion",
        }[self.method]
        if self.restart_after is not None:
            what += f"; restarts from 0 after a gap longer than {span_words(self.restart_after)}"
        if self.missing == "skip":
            what += "; a missing value contributes nothing"
        else:
            what += "; missing from the first missing contribution until the accumulation restarts"
        return what + where_words(self.where)

    def unit_kinds(self, time: str) -> tuple[str | None, ...]:
        return ("area",) if self.method in ("step", "trapezoid") else (None,)

    def compute(self, panel: Panel) -> Sequence[Any]:
        s = panel.subjects
        y = panel.columns.numeric(self.col)
        allowed = sources(panel, self.where)
        if allowed is not None:  # rows that may not serve as sources add nothing (not "missing")
            y = np.where(allowed, y, 0.0)
        if self.method == "sum" and self.restart_after is None:
            # A plain running total needs no intervals (same values as the general path).
            bad = np.isnan(y)
            out = K.cumsum(s, np.where(bad, 0.0, y))
            if self.missing == "propagate":
                out[K.last_index_upto(s, bad) >= 0] = np.nan
            return [out]
        if allowed is None:
            prev = K.shift_index(s, 1)
        else:  # intervals join consecutive source rows; the other rows start none
            prev = np.where(allowed, K.at_previous(s, K.last_index_upto(s, allowed)), -1)
        has_prev = prev >= 0
        pi = np.maximum(prev, 0)
        breaks = np.zeros(panel.n, dtype=bool)
        runs = s  # without restarts the runs are the subjects
        if self.restart_after is not None:
            # a gap longer than the span: the previous occasion lies strictly before t - span
            recent = panel.axis.back(panel.span(self.restart_after, "restart_after"), strict=False)
            breaks = has_prev & (panel.axis.key[pi] < recent)
            runs = s.split(breaks)
        linked = has_prev & ~breaks  # the interval from the previous occasion counts
        miss = np.isnan(y)
        dt = panel.axis.elapsed(panel.t, panel.t[pi])  # 0 on each subject's first row
        if self.method == "sum":
            bad = miss
            part = np.where(bad, 0.0, y)
        elif self.method == "step":
            bad = linked & miss[pi]
            part = np.where(linked & ~bad, y[pi] * dt, 0.0)
        else:
            bad = linked & (miss[pi] | miss)
            part = np.where(linked & ~bad, (y[pi] + y) * 0.5 * dt, 0.0)
        out = K.cumsum(runs, part)
        if self.missing == "propagate":
            out[K.last_index_upto(runs, bad) >= 0] = np.nan
        return [out]


@checked_options
def cumulative(
    col: str,
    method: Literal["sum", "step", "trapezoid"] = "sum",
    *,
    restart_after: str | float | None = None,
    missing: Literal["skip", "propagate"] = "skip",
    where: str | None = None,
    name: str | None = None,
) -> Cumulative:
    """Cumulative exposure to ``col`` up to each occasion, within the subject.

    Methods (for occasions t_1 < t_2 < ... with values v_1, v_2, ...; the value at the
    subject's first occasion is v_1 for ``"sum"`` and 0 for the two integrals):

    - ``"sum"``: v_1 + ... + v_k, a running total of amounts (doses given, cigarettes
      bought, events counted).
    - ``"step"``: the sum over j <= k of v_{j-1} (t_j - t_{j-1}): each value is held until
      the next occasion, the usual dose rate x duration integral.  Pack-years are the
      step integral of packs per day (cigarettes per day / 20) over time in years.
    - ``"trapezoid"``: the area under the straight lines joining the occasions from the
      first one, the sum of (v_{j-1} + v_j) / 2 (t_j - t_{j-1}).

    The integrals are in value x time units: the time column's own units for numeric
    times, the ``unit`` of :func:`~panelfx.derive` (default days) for datetimes.

    ``restart_after`` (a number for numeric times, a span such as ``"180D"`` for
    datetimes) restarts the accumulation after a gap between occasions strictly longer
    than it: the occasion after the gap starts again as if it were the subject's first
    (sum = its own value, integrals = 0), and the interval across the gap adds nothing.

    ``where`` (a true/false column): only occasions where it is true are sources: a sum
    adds their values, and the integrals run along the curve through them alone (an
    interval joins two consecutive such occasions, whatever lies between); the other rows
    add nothing and still receive the running total.

    Missing values (``missing=``): ``"skip"`` (default) - a missing value contributes
    nothing: it adds 0 to a sum, and every interval it bounds (the one after it for
    ``"step"``, both neighbours for ``"trapezoid"``) adds 0; the running total is still
    reported on its row.  ``"propagate"`` - the result is missing from the first row whose
    contribution needs a missing value (its own row for ``"sum"`` and ``"trapezoid"``,
    the next row for ``"step"``) until the accumulation restarts or the subject ends.
    Past-only.  Output float64.  Default names: ``<col>_cum``, ``<col>_cum_step``,
    ``<col>_auc``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "day": [0, 1, 3, 6, 0],
    ...                    "mg": [2.0, 4.0, 4.0, 1.0, 5.0]})
    >>> pfx.derive(df, pfx.cumulative("mg"), pfx.cumulative("mg", "step"),
    ...           pfx.cumulative("mg", "trapezoid"), id="pid", time="day")
       pid  day   mg  mg_cum  mg_cum_step  mg_auc
    0    1    0  2.0     2.0          0.0     0.0
    1    1    1  4.0     6.0          2.0     3.0
    2    1    3  4.0    10.0         10.0    11.0
    3    1    6  1.0    11.0         22.0    18.5
    4    2    0  5.0     5.0          0.0     0.0
    """
    return Cumulative(col=col, method=method, restart_after=restart_after, missing=missing, where=where, name=name)
