"""Reference: within/between decomposition (subject mean or baseline, and the deviation)."""

from __future__ import annotations

import math
from typing import Any

from . import Subject, register


@register("within_between")
def within_between(tr: Any, s: Subject) -> list[list[Any]]:
    y = s.values(tr.col)
    present = [v for v in y if not math.isnan(v)]
    if not present:
        level = math.nan
    elif tr.level == "mean":
        level = math.fsum(present) / len(present)
    else:
        level = present[0]
    return [[level] * len(y), [v - level for v in y]]
