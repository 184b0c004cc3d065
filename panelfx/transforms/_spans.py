"""Validation of time-span options (offsets, gaps, limits) shared by several transforms.

A span is stored as a plain value so saved derivations stay JSON-friendly: a number
(for numeric time columns, in their units) or a string such as ``"30D"`` (for datetime
time columns).  Whether it fits the time column can only be known once the panel is
seen; :meth:`panelfx._panel.Panel.span` checks that at compute time.
"""

from __future__ import annotations

import datetime as _dt
import math
from typing import Any

import numpy as np
import pandas as pd

from .._time import span_ns
from ..errors import OptionError


def check_span(name: str, value: Any, *, allow_zero: bool = False) -> str | int | float:
    """A positive (or, with ``allow_zero``, non-negative) span as a plain value.

    Timedelta objects are turned into their string form; a string must carry a unit
    (``"30"`` would silently mean 30 nanoseconds to pandas).
    """
    rule = "a non-negative" if allow_zero else "a positive"
    hint = f"{name} must be {rule} number (numeric times) or time span such as '30D' (datetime times)"
    if isinstance(value, bool) or value is None:
        raise OptionError(f"{hint}, got {value!r}")
    if isinstance(value, (int, float, np.integer, np.floating)):
        v = value.item() if isinstance(value, np.generic) else value
        if not math.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
            raise OptionError(f"{hint}, got {value!r}")
        return v
    if isinstance(value, (pd.Timedelta, _dt.timedelta, np.timedelta64)):
        if pd.isna(value):
            raise OptionError(f"{hint}, got {value!r}")
        value = compact(pd.Timedelta(value).value)
    if isinstance(value, str):
        if not any(c.isalpha() for c in value):
            raise OptionError(f"{name}={value!r} has no unit: write e.g. '{value.strip()}D' for days")
        try:
            ns = span_ns(value)  # also spans longer than pandas' Timedelta holds (about 292 years)
        except (ValueError, OverflowError):
            raise OptionError(f"{name}={value!r} is not a time span such as '30D'") from None
        if ns < 0 or (ns == 0 and not allow_zero):
            raise OptionError(f"{hint}, got {value!r}")
        return value
    raise OptionError(f"{hint}, got {value!r}")


def compact(ns: int) -> str:
    """Nanoseconds as the shortest exact pandas span string: 90 days -> '90D'."""
    for abbr, size in (("D", 86_400 * 10**9), ("h", 3_600 * 10**9), ("min", 60 * 10**9), ("s", 10**9),
                       ("ms", 10**6), ("us", 10**3)):
        if ns % size == 0:
            return f"{ns // size}{abbr}"
    return f"{ns}ns"


def span_words(value: str | int | float) -> str:
    """How a span reads in a description: '30D' or '30 time units'."""
    return repr(value) if isinstance(value, str) else f"{value:g} time units"


def span_label(value: str | int | float) -> str:
    """A span or number as part of a formula-safe, case-normalised column name: '30D' -> '30d',
    2.5 -> '2p5', so names are Python identifiers (model formulas) and '90D' and '90d' name one
    window once (case-insensitive stores)."""
    text = value.replace(" ", "") if isinstance(value, str) else f"{value:g}"
    text = text.lower().replace(".", "p").replace("-", "m").replace("+", "")
    return "".join(ch if ch.isalnum() or ch == "_" else "_" for ch in text)
