"""Reference: values, windows and exposure from side tables (as_of, table_window, exposure,
first_dose, last_dose), as plain loops over one subject's records."""

from __future__ import annotations

import math
from typing import Any

import pandas as pd

from ...errors import IntervalError, TiedRecordsError
from . import Subject, is_missing, register

_DAY_NS = 86_400 * 10**9


def _records(s: Subject, table: str, time: str) -> tuple[pd.DataFrame, list[float]]:
    recs = s.tables.get(table, pd.DataFrame())
    if len(recs) == 0:
        return recs, []
    return recs, [s.native(v) for v in recs[time].tolist()]


def _value(v: Any) -> Any:
    return None if is_missing(v) else v


@register("as_of")
def as_of(tr: Any, s: Subject) -> list[list[Any]]:
    recs, rt = _records(s, tr.table, tr.time)
    cols = list(tr.cols)
    groups = [[c] for c in cols] if not tr.together else [cols]
    if not cols:
        groups = [[]]
    span = s.span(tr.within) if tr.within is not None else None
    found: dict[tuple[str, str], list[Any]] = {}
    stamps: dict[str, list[Any]] = {"time": [], "age": []}
    raw = {c: [_value(v) for v in recs[c].tolist()] for c in cols} if len(recs) else {c: [] for c in cols}
    order = recs[tr.order].tolist() if tr.order and len(recs) else []
    for group in groups:
        for c in group:
            found[(c, "value")] = []
        stamps = {"time": [], "age": []}
        for t in s.times:
            # records at an allowed time, each with the values it offers
            ok = []
            for j, u in enumerate(rt):
                if tr.direction == "backward" and not (u <= t if tr.include_current else u < t):
                    continue
                if tr.direction == "forward" and not (u >= t if tr.include_current else u > t):
                    continue
                if span is not None and abs(t - u) > span:
                    continue
                if tr.skip_missing and any(raw[c][j] is None for c in group):
                    continue
                ok.append(j)
            if not ok:
                for c in group:
                    found[(c, "value")].append(None)
                stamps["time"].append(None)
                stamps["age"].append(None)
                continue
            if tr.direction == "backward":
                best = max(rt[j] for j in ok)
            elif tr.direction == "forward":
                best = min(rt[j] for j in ok)
            else:
                best = min((abs(t - rt[j]), rt[j]) for j in ok)[1]  # equal distance: the earlier one
            tied = [j for j in ok if rt[j] == best]
            for c in group:
                found[(c, "value")].append(_tie_value(tr, [raw[c][j] for j in tied], [order[j] for j in tied]
                                                      if order else [], group, raw, tied))
            stamps["time"].append(recs[tr.time].iloc[tied[0]])
            stamps["age"].append(s.duration(t, best))
        for c in group:
            found[(c, "time")] = stamps["time"]
            found[(c, "age")] = stamps["age"]
    out = []
    for c in cols:
        for k in tr.keep:
            if k == "value" or not tr.together:
                out.append(found[(c, k)])
    if not cols or tr.together:
        out += [stamps[k] for k in tr.keep if k != "value"]
    return out


def _tie_value(tr: Any, values: list[Any], order: list[Any], group: list[str], raw: dict[str, list[Any]],
               tied: list[int]) -> Any:
    if len(values) == 1:
        return float(values[0]) if tr.ties == "mean" and values[0] is not None else values[0]
    present = [v for v in values if v is not None]
    if tr.ties == "error":
        for c in group:
            if len({repr(raw[c][j]) for j in tied}) > 1:
                raise TiedRecordsError("tied records disagree")
        return values[0]
    if tr.ties in ("first", "last"):
        pick = (min if tr.ties == "first" else max)(range(len(values)), key=lambda k: order[k])
        return values[pick]
    if not present:
        return None
    if tr.ties == "mean":
        return sum(float(v) for v in present) / len(present)
    return (min if tr.ties == "min" else max)(present, key=float)


@register("table_window")
def table_window(tr: Any, s: Subject) -> list[list[Any]]:
    recs, rt = _records(s, tr.table, tr.time)
    vals: list[Any] = [_value(v) for v in recs[tr.col].tolist()] if tr.col and len(recs) else [None] * len(rt)
    span = s.span(tr.span) if tr.span is not None else None
    out: list[Any] = []
    for t in s.times:
        inside = []
        for j, u in enumerate(rt):
            right = u <= t if tr.closed in ("right", "both") else u < t
            left = True if span is None else (u >= t - span if tr.closed in ("both", "left") else u > t - span)
            if right and left:
                inside.append(j)
        if tr.col is None:
            out.append(len(inside) > 0 if tr.stat == "any" else len(inside))
            continue
        present: list[Any] = [vals[j] for j in inside if vals[j] is not None]
        if tr.stat == "count":
            out.append(len(present))
        elif len(present) < tr.min_valid:
            out.append(None)
        elif tr.stat == "any":
            out.append(any(bool(v) for v in present))
        elif tr.stat == "sum":
            out.append(math.fsum(float(v) for v in present))
        elif tr.stat == "mean":
            out.append(math.fsum(float(v) for v in present) / len(present) if present else None)
        elif tr.stat == "min":
            out.append(min(float(v) for v in present) if present else None)
        else:
            out.append(max(float(v) for v in present) if present else None)
    return [out]


def _day(s: Subject) -> float:
    return 1.0 if s.unit is None else _DAY_NS


def _intervals(tr: Any, s: Subject) -> tuple[pd.DataFrame, list[tuple[float, float, Any]]]:
    """[start, end) per record, in native units, with its dose (None: missing); ends made
    effective by the overlap rule; open ends as +inf."""
    recs, st = _records(s, tr.table, tr.start)
    step = _day(s) if tr.inclusive else 0.0
    items = []
    for j, a in enumerate(st):
        if tr.end is not None:
            e = recs[tr.end].iloc[j]
            if is_missing(e):
                if tr.open_end == "error":
                    raise IntervalError("record without an end")
                b = math.inf
            else:
                b = s.native(e)
                if b < a:
                    raise IntervalError("ends before it starts")
                b += step
        else:
            sup = recs[tr.supply].iloc[j]
            if is_missing(sup):
                if tr.open_end == "error":
                    raise IntervalError("record without an end")
                b = math.inf
            else:
                b = a + float(sup) * _day(s)
        d = recs[tr.dose].iloc[j] if getattr(tr, "dose", None) else 1.0
        items.append((a, b, None if is_missing(d) else float(d)))
    items.sort(key=lambda x: x[0])
    if tr.overlap == "latest":
        items = [(a, min(b, items[k + 1][0]) if k + 1 < len(items) else b, d) for k, (a, b, d) in enumerate(items)]
    elif tr.overlap == "error":
        reach = -math.inf
        for a, b, _ in items:
            if a < reach:
                raise IntervalError("overlap")
            reach = max(reach, b)
    return recs, items


@register("exposure")
def exposure(tr: Any, s: Subject) -> list[list[Any]]:
    _, items = _intervals(tr, s)
    step = _day(s) if tr.inclusive and tr.include_current else 0.0
    lag = s.span(tr.lag) if tr.lag is not None else 0.0
    grace = s.span(tr.grace) if tr.grace is not None else 0.0
    out: list[Any] = []
    for t0 in s.times:
        t = t0 - lag
        c = t + step
        if tr.stat == "current":
            cover = [d for a, b, d in items if a <= t < b]
            out.append(None if any(d is None for d in cover) else sum(cover))
        elif tr.stat == "on_treatment":
            out.append(any(a <= t < b + grace for a, b, _ in items if b > a))
        elif tr.stat == "days_on":
            covered = 0.0
            reach = -math.inf
            for a, b, _ in sorted(items):
                lo, hi = max(a, reach), min(b, c)
                if hi > lo:
                    covered += hi - lo
                reach = max(reach, b)
            out.append(s.duration(covered, 0.0))
        else:
            total = 0.0
            unknown = False
            for a, b, d in items:
                if a < c and b > a:
                    if d is None:
                        unknown = True
                    else:
                        total += d * s.duration(min(b, c), a)
            if unknown:
                out.append(None)
            elif tr.stat == "cumulative":
                out.append(total)
            else:
                starts = [a for a, _, _ in items]
                first = min(starts) if starts else None
                out.append(None if first is None or not first < c else total / s.duration(c, first))
    return [out]


@register("first_dose")
def first_dose(tr: Any, s: Subject) -> list[list[Any]]:
    recs, st = _records(s, tr.table, tr.start)
    value = recs[tr.start].iloc[min(range(len(st)), key=lambda j: st[j])] if st else None
    return [[value] * len(s.times)]


@register("last_dose")
def last_dose(tr: Any, s: Subject) -> list[list[Any]]:
    recs, items = _intervals(tr, s)
    if not items or any(math.isinf(b) for _, b, _ in items):
        return [[None] * len(s.times)]
    last = max(b for _, b, _ in items) - _day(s)  # the last covered day
    if tr.end is not None:
        ends = [s.native(v) for v in recs[tr.end].tolist()]
        value = recs[tr.end].iloc[ends.index(last)]
    elif s.unit is None:
        value = last
    else:
        value = last  # nanoseconds: compared as native times by the tests
    return [[value] * len(s.times)]
