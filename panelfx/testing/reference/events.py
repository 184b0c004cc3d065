"""References: time since an event, events so far, ever/never."""

from __future__ import annotations

import math
from typing import Any

from . import Subject, register
from .history import allowed


def _events(s: Subject, col: str, tr: Any = None) -> list[bool]:
    """True where the flag is true; a missing flag is not an event; numbers: non-zero is true;
    with ``where=``, only at occasions where that column is true."""
    ok = allowed(tr, s) if tr is not None else [True] * len(s.times)
    return [v is not None and bool(v != 0) and ok[j] for j, v in enumerate(s.raw(col))]


def _counted(i: int, j: int, include_current: bool) -> bool:
    return j <= i if include_current else j < i


@register("time_since")
def time_since(tr: Any, s: Subject) -> list[list[Any]]:
    ev = _events(s, tr.col, tr)
    out = []
    for i in range(len(ev)):
        hits = [j for j in range(len(ev)) if ev[j] and _counted(i, j, tr.include_current)]
        if not hits:
            out.append(math.nan)
        else:
            j = hits[-1] if tr.which == "last" else hits[0]
            out.append(s.duration(s.times[i], s.times[j]))
    return [out]


@register("events_so_far")
def events_so_far(tr: Any, s: Subject) -> list[list[Any]]:
    ev = _events(s, tr.col, tr)
    return [[sum(1 for j in range(len(ev)) if ev[j] and _counted(i, j, tr.include_current))
             for i in range(len(ev))]]


@register("ever")
def ever(tr: Any, s: Subject) -> list[list[Any]]:
    ev = _events(s, tr.col, tr)
    return [[any(ev[j] and _counted(i, j, tr.include_current) for j in range(len(ev))) for i in range(len(ev))]]
