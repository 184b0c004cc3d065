"""Reference: carry forward the last non-missing value, within limits."""

from __future__ import annotations

from typing import Any

from . import Subject, register
from .history import allowed


@register("carry_forward")
def carry_forward(tr: Any, s: Subject) -> list[list[Any]]:
    raw = s.raw(tr.col)
    ok = allowed(tr, s)
    out: list[Any] = []
    flag: list[Any] = []
    for i in range(len(raw)):
        found = None
        for j in range(i, -1, -1):
            if raw[j] is not None and ok[j]:
                found = j
                break
        if found is not None and tr.limit is not None and i - found > tr.limit:
            found = None
        if found is not None and tr.max_span is not None and s.times[i] - s.times[found] > s.span(tr.max_span):
            found = None
        out.append(None if found is None else raw[found])
        flag.append("LOCF" if found is not None and found != i else None)
    return [out, flag] if getattr(tr, "flag", False) else [out]
