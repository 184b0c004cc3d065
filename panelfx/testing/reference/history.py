"""References: baseline, change from baseline, change from previous, lag (by occasions or by time offset)."""

from __future__ import annotations

import math
from typing import Any

from . import Subject, register


def allowed(tr: Any, s: Subject) -> list[bool]:
    """Rows that may serve as sources: where the ``where`` column is true (missing: false)."""
    where = getattr(tr, "where", None)
    if where is None:
        return [True] * len(s.times)
    return [v is not None and bool(v) for v in s.raw(where)]


def _baseline_position(tr: Any, s: Subject) -> int | None:
    raw = s.raw(tr.col)
    ok = allowed(tr, s)
    if tr.rule == "first":
        return next((j for j in range(len(raw)) if ok[j]), None)
    if tr.rule == "first_valid":
        for j, v in enumerate(raw):
            if v is not None and ok[j]:
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
        if s.times[j] <= ref and v is not None and ok[j]:
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
            dt = s.duration(s.times[i], s.times[prev])
            out.append(math.nan if math.isnan(v) or math.isnan(y[prev]) or dt == 0  # tied rows: no rate
                       else (v - y[prev]) / dt)
        else:
            out.append(_change(v, y[prev], tr.kind))
    return [out]


@register("lag")
def lag(tr: Any, s: Subject) -> list[list[Any]]:
    raw = s.raw(tr.col)
    ok = allowed(tr, s)
    source = [ok[j] and (not tr.skip_missing or raw[j] is not None) for j in range(len(raw))]
    if getattr(tr, "offset", None) is not None:
        # as of t - offset: the latest qualifying occasion at or before that time (and never after the
        # current row in the sequence), not older than the tolerance, measured from that occasion
        off = s.span(tr.offset)
        out = []
        for i in range(len(raw)):
            target = s.times[i] - off
            found = None
            for j in range(i + 1):
                if s.times[j] <= target and source[j]:
                    found = j
            if found is not None and tr.tolerance is not None and s.times[found] < target - s.span(tr.tolerance):
                found = None
            out.append(None if found is None else raw[found])
        return [out]
    k = tr.periods
    out = []
    for i in range(len(raw)):
        # the k-th qualifying occasion before row i (after it, for k < 0)
        steps = range(i - 1, -1, -1) if k > 0 else range(i + 1, len(raw))
        found, seen = None, 0
        for j in steps:
            if source[j]:
                seen += 1
                if seen == abs(k):
                    found = j
                    break
        out.append(None if found is None else raw[found])
    return [out]


