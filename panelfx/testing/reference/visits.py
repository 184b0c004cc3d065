"""References: study day, analysis visit, visit pick, baseline / worst carried forward.

Plain loops over one subject's rows, from the documented definitions; decimals compared
as the decimals they print as (``Fraction(Decimal(repr(x)))``), dates as ``datetime.date``.
"""

from __future__ import annotations

import datetime as dt
from decimal import Decimal
from fractions import Fraction
from typing import Any

import pandas as pd

from . import Subject, register
from .history import _baseline_position


def _exact(x: Any) -> Fraction:
    return Fraction(Decimal(repr(float(x)))) if not isinstance(x, int) else Fraction(x)


def _calendar(v: Any) -> Any:
    """A date or number as something one can subtract: a date in the value's own zone,
    whole days of a timedelta, or the number."""
    if isinstance(v, pd.Timestamp):
        return v.date()  # an aware Timestamp shows its own zone's date
    if isinstance(v, dt.datetime):
        return v.date()
    if isinstance(v, dt.date):
        return v
    if isinstance(v, (pd.Timedelta, dt.timedelta)):
        return pd.Timedelta(v).days  # floor, like Python's timedelta.days
    return float(v)


@register("study_day")
def study_day(tr: Any, s: Subject) -> list[list[Any]]:
    refs = s.raw(tr.reference)
    dates = s.raw(tr.date if tr.date is not None else s.time)
    out: list[Any] = []
    for v, r in zip(dates, refs):
        if v is None or r is None:
            out.append(None)
            continue
        diff = _calendar(v) - _calendar(r)
        days = diff.days if isinstance(diff, dt.timedelta) else diff
        if tr.convention == "no_day_0" and days >= 0:
            days += 1
        out.append(days)
    return [out]


def _day(tr: Any, s: Subject) -> list[Any]:
    return s.raw(tr.day if tr.day is not None else s.time)


@register("analysis_visit")
def analysis_visit(tr: Any, s: Subject) -> list[list[Any]]:
    labels: list[Any] = []
    numbers: list[Any] = []
    targets: list[Any] = []
    dists: list[Any] = []
    for d in _day(tr, s):
        best = None
        if d is not None:
            for j, (_label, low, high, target) in enumerate(tr.windows):
                if (low is None or _exact(low) <= _exact(d)) and (high is None or _exact(d) <= _exact(high)):
                    gap = abs(_exact(d) - _exact(target))
                    if best is None or gap < best[1]:  # strict: the earlier window keeps a tie
                        best = (j, gap)
        if best is None:
            labels.append(tr.outside if d is not None else None)
            numbers.append(None)
            targets.append(None)
            dists.append(None)
        else:
            j, gap = best
            labels.append(tr.windows[j][0])
            numbers.append(j + 1)
            targets.append(float(tr.windows[j][3]))
            dists.append(float(gap))
    return [labels, numbers, targets, dists]


@register("visit_pick")
def visit_pick(tr: Any, s: Subject) -> list[list[Any]]:
    raw = s.raw(tr.col)
    visits = s.raw(tr.visit)
    need = tr.rule in ("nearest", "last_on_or_before_target")
    days = _day(tr, s) if need else [None] * len(raw)
    targets = s.raw(tr.target) if need else [None] * len(raw)
    chosen: dict[Any, int] = {}
    for i in range(len(raw)):
        if raw[i] is None or visits[i] is None:
            continue
        if need and (days[i] is None or targets[i] is None):
            continue
        if tr.rule == "last_on_or_before_target" and _exact(days[i]) > _exact(targets[i]):
            continue
        j = chosen.get(visits[i])
        if j is None or _better(tr, i, j, raw, days, targets):
            chosen[visits[i]] = i
    picked = set(chosen.values())
    return [[i in picked for i in range(len(raw))]]


def _better(tr: Any, i: int, j: int, raw: list[Any], days: list[Any], targets: list[Any]) -> bool:
    """Is row i (later in time than j) the better pick?"""
    if tr.rule == "first":
        return False
    if tr.rule in ("last", "last_on_or_before_target"):
        return True
    a: Fraction | float
    b: Fraction | float
    if tr.rule == "nearest":
        a, b = abs(_exact(days[i]) - _exact(targets[i])), abs(_exact(days[j]) - _exact(targets[j]))
    else:
        a, b = (float(raw[i]), float(raw[j])) if tr.rule == "min" else (-float(raw[i]), -float(raw[j]))
    return a < b or (a == b and tr.prefer == "later")


@register("carry_baseline")
def carry_baseline(tr: Any, s: Subject) -> list[list[Any]]:
    raw = s.raw(tr.col)
    b = _baseline_position(tr, s)
    out: list[Any] = []
    flag: list[Any] = []
    for i, v in enumerate(raw):
        fill = v is None and b is not None and i > b and raw[b] is not None
        out.append(raw[b] if fill and b is not None else v)
        flag.append("BOCF" if fill else None)
    return [out, flag] if tr.flag else [out]


@register("carry_worst")
def carry_worst(tr: Any, s: Subject) -> list[list[Any]]:
    raw = s.raw(tr.col)
    out: list[Any] = []
    flag: list[Any] = []
    worst = None
    for v in raw:
        if v is not None:
            if worst is None or (float(v) > float(worst) if tr.worst == "max" else float(v) < float(worst)):
                worst = v
            out.append(v)
            flag.append(None)
        else:
            out.append(worst)
            flag.append("WOCF" if worst is not None else None)
    return [out, flag] if tr.flag else [out]
