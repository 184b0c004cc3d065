"""References: occasion number, gap since the previous occasion, time since the first occasion."""

from __future__ import annotations

import math
from typing import Any

from . import Subject, register


@register("occasion")
def occasion(tr: Any, s: Subject) -> list[list[Any]]:
    return [[k + 1 for k in range(len(s.times))]]


@register("gap")
def gap(tr: Any, s: Subject) -> list[list[Any]]:
    return [[math.nan if k == 0 else s.duration(s.times[k], s.times[k - 1]) for k in range(len(s.times))]]


@register("time_since_baseline")
def time_since_baseline(tr: Any, s: Subject) -> list[list[Any]]:
    return [[s.duration(t, s.times[0]) for t in s.times]]
