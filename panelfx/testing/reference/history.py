"""References: baseline, change from baseline, change from previous, lag (by occasions or by time offset)."""

from __future__ import annotations

import math
from typing import Any

from . import Subject, register


def _baseline_position(tr: Any, s: Subject) -> int | None:
    raw = s.raw(tr.col)
    if tr.rule == "first":
        return 0
    if tr.rule == "first_valid":
        for j, v in enumerate(raw):
            if v is not None:
                return j
        return None
    # last_before: last non-missing value at or before the subject's reference time
    if isinstance(tr.reference, str):
        refs = [s.native(v) for v in s.raw(tr.reference) if v is not None]
        if not refs:
            return None
        ref = refs[0]
    else:
        ref = float(tr.reference)
    found = None
    for j, v in enumerate(raw):
        if s.times[j] <= ref and v is not None:
            found = j
    return found


@register("baseline")
def baseline(tr: Any, s: Subject) -> list[list[Any]]:
    j = _baseline_position(tr, s)
    raw = s.raw(tr.col)
    return [[None if j is None else raw[j] for _ in raw]]


def _change(y: float, ref: float, kind: str) -> float:
    if math.isnan(y) or math.isnan(ref):
        return math.nan
    if kind == "difference":
        return y - ref
    if ref == 0:
        return math.nan
    return 100.0 * (y - ref) / ref if kind == "percent" else y / ref


@register("change_from_baseline")
def change_from_baseline(tr: Any, s: Subject) -> list[list[Any]]:
    y = s.values(tr.col)
    j = _baseline_position(tr, s)
    out = []
    for i, v in enumerate(y):
        if j is None or (tr.after_baseline_only and i <= j):
            out.append(math.nan)
        else:
            out.append(_change(v, y[j], tr.kind))
    return [out]


@register("change_from_previous")
def change_from_previous(tr: Any, s: Subject) -> list[list[Any]]:
    y = s.values(tr.col)
    out = []
    for i, v in enumerate(y):
        prev = None
        for j in range(i - 1, -1, -1):
            if not tr.skip_missing or not math.isnan(y[j]):
                prev = j
                break
        if prev is None:
            out.append(math.nan)
        elif tr.kind == "rate":
            out.append(math.nan if math.isnan(v) or math.isnan(y[prev])
                       else (v - y[prev]) / s.duration(s.times[i], s.times[prev]))
        else:
            out.append(_change(v, y[prev], tr.kind))
    return [out]


@register("lag")
def lag(tr: Any, s: Subject) -> list[list[Any]]:
    raw = s.raw(tr.col)
    if getattr(tr, "offset", None) is not None:
        # as of t - offset: the latest occasion at or before that time, not older than the tolerance
        off = s.span(tr.offset)
        out = []
        for i in range(len(raw)):
            target = s.times[i] - off
            found = None
            for j in range(len(raw)):
                if s.times[j] <= target:
                    found = j
            if found is not None and tr.tolerance is not None and s.times[found] < target - s.span(tr.tolerance):
                found = None
            out.append(None if found is None else raw[found])
        return [out]
    k = tr.periods
    return [[raw[i - k] if 0 <= i - k < len(raw) else None for i in range(len(raw))]]


