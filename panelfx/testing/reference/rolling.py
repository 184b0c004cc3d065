"""Reference: rolling summaries over occasions, a span of time, or the history so far.

Each row's window is built from the definition by testing every row of the subject,
and its statistic is computed with the standard library (exactly rounded sums, exact
variance), sharing nothing with the vectorised window kernels.
"""

from __future__ import annotations

import math
import statistics
from typing import Any

from . import Subject, register
from .history import allowed


def _members(tr: Any, s: Subject, i: int, span: float | None) -> list[int]:
    """Positions j of the subject's rows in row i's window."""
    out = []
    for j in range(len(s.times)):
        if j > i or (tr.exclude_current and j == i):
            continue  # windows end at the current occasion
        if tr.occasions is not None:
            first = i - tr.occasions + (0 if tr.exclude_current else 1)
            inside = j >= first
        elif span is not None:
            start = s.times[i] - span
            left = s.times[j] >= start if tr.closed in ("both", "left") else s.times[j] > start
            right = s.times[j] <= s.times[i] if tr.closed in ("both", "right") else s.times[j] < s.times[i]
            inside = left and right
        else:
            inside = True
        if inside:
            out.append(j)
    return out


def _statistic(stat: str, vals: list[float]) -> float:
    n = len(vals)
    finite = all(math.isfinite(v) for v in vals)
    if stat == "sum":
        return math.fsum(vals) if finite else sum(vals)
    if n == 0:
        return math.nan
    if stat == "mean":
        return (math.fsum(vals) if finite else sum(vals)) / n
    if stat == "min":
        return min(vals)
    if stat == "max":
        return max(vals)
    if stat == "median":
        v = sorted(vals)
        return v[n // 2] if n % 2 == 1 else (v[n // 2 - 1] + v[n // 2]) / 2
    if n < 2 or not finite:
        return math.nan
    var = statistics.variance(vals)
    return math.sqrt(var) if stat == "std" else var


@register("rolling")
def rolling(tr: Any, s: Subject) -> list[list[Any]]:
    ok = allowed(tr, s)
    y = [v if ok[j] else math.nan for j, v in enumerate(s.values(tr.col))]  # where=: others left out
    span = None if tr.span is None else s.span(tr.span)
    out: list[Any] = []
    for i in range(len(y)):
        vals = [y[j] for j in _members(tr, s, i, span) if not math.isnan(y[j])]
        if tr.stat == "count":
            out.append(len(vals))
        elif len(vals) < tr.min_valid:
            out.append(math.nan)
        else:
            out.append(_statistic(tr.stat, vals))
    return [out]
