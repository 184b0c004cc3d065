"""Reference: cumulative exposure (running sum, step integral, trapezoid area)."""

from __future__ import annotations

import math
from typing import Any

from . import Subject, register
from .history import allowed


@register("cumulative")
def cumulative(tr: Any, s: Subject) -> list[list[Any]]:
    ok = allowed(tr, s)
    y = [v if ok[j] else 0.0 for j, v in enumerate(s.values(tr.col))]  # where=: others add nothing
    out: list[float] = []
    total = 0.0
    broken = False  # missing="propagate": a needed value was missing since the last (re)start
    for k in range(len(y)):
        # the previous source row: intervals join consecutive sources (every row, without where=)
        p = next((j for j in range(k - 1, -1, -1) if ok[j]), None) if ok[k] else None
        gap_too_long = p is not None and tr.restart_after is not None and \
            s.times[k] - s.times[p] > s.span(tr.restart_after)
        restart = k == 0 or gap_too_long
        if restart:
            total, broken = 0.0, False
        if tr.method == "sum":
            needed = [y[k]]
            piece = y[k]
        elif restart or p is None:
            needed, piece = [], 0.0  # an integral starts from 0 at the (re)start; no interval here
        else:
            width = s.duration(s.times[k], s.times[p])
            if tr.method == "step":
                needed = [y[p]]
                piece = y[p] * width
            else:
                needed = [y[p], y[k]]
                piece = (y[p] + y[k]) / 2 * width
        if any(math.isnan(v) for v in needed):
            broken = True  # contributes nothing
        else:
            total += piece
        out.append(math.nan if broken and tr.missing == "propagate" else total)
    return [out]
