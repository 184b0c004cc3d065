"""Analysis windows: planned visits as a value, validated when built.

A :class:`Windows` is an ordered list of planned visits, each a label and an inclusive
range of study days with a target day: ``(label, low, high, target)``.  The order is the
visit number (1, 2, ...).  It is a plain value: it compares by content, prints its rows,
and saves as plain JSON lists (:meth:`Windows.rows`), so a saved derivation holds it.

Rules checked when it is built (an :class:`~panelfx.OptionError` names the window):

- labels are non-empty text and unique;
- ``low <= target <= high``; ``target`` is a finite number; ``low`` may be ``None`` (open
  below) on the first window only and ``high`` may be ``None`` (open above) on the last only;
- windows are sorted: lows, highs and targets strictly increase with the visit number;
- windows do not overlap (``high`` of one < ``low`` of the next, bounds being inclusive),
  unless ``overlap="nearest_target"``: a day inside several windows then goes to the window
  whose target is nearest, the earlier window on a tie.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd

from ._options import checked_options
from .errors import OptionError

__all__ = ["Windows", "windows", "OVERLAP_RULES", "Row"]

#: Values of ``overlap``: "none" (overlapping windows are an error) or "nearest_target".
OVERLAP_RULES = ("none", "nearest_target")

#: One window as plain values: (label, low, high, target); low/high None for an open end.
Row = tuple[str, "float | None", "float | None", float]


def _number(value: Any, what: str, *, open_ok: bool) -> float | int | None:
    if value is None and open_ok:
        return None
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, float, np.integer, np.floating)):
        allowed = "a number (or None for an open end)" if open_ok else "a number"
        raise OptionError(f"{what} must be {allowed}, got {value!r}")
    v = value.item() if isinstance(value, np.generic) else value
    if isinstance(v, float) and not math.isfinite(v):
        raise OptionError(f"{what} must be finite (use None for an open end), got {value!r}")
    return v


@dataclass(frozen=True)
class Windows:
    """Planned visits with their analysis windows (see the module docstring); build with :func:`windows`."""

    items: tuple[Row, ...]
    overlap: str = "none"

    def __post_init__(self) -> None:
        if self.overlap not in OVERLAP_RULES:
            raise OptionError(f"overlap must be one of {list(OVERLAP_RULES)}, got {self.overlap!r}")
        given: Any = self.items
        if isinstance(given, (str, bytes)) or not isinstance(given, Iterable):
            raise OptionError(f"windows must be a list of (label, low, high, target) rows, got {given!r}")
        rows = list(given)
        if not rows:
            raise OptionError("windows must hold at least one window")
        clean: list[Row] = []
        for k, row in enumerate(rows):
            if isinstance(row, (str, bytes)) or not isinstance(row, Sequence) or len(row) != 4:
                raise OptionError(f"window #{k + 1} must be (label, low, high, target), got {row!r}")
            label, low, high, target = row
            if not isinstance(label, str) or not label:
                raise OptionError(f"window #{k + 1}: label must be non-empty text, got {label!r}")
            what = f"window {label!r}"
            lo = _number(low, f"{what}: low", open_ok=k == 0)
            hi = _number(high, f"{what}: high", open_ok=k == len(rows) - 1)
            tg = _number(target, f"{what}: target", open_ok=False)
            assert tg is not None
            if (lo is not None and lo > tg) or (hi is not None and tg > hi):
                raise OptionError(f"{what}: needs low <= target <= high, got low={lo!r}, target={tg!r}, high={hi!r}")
            clean.append((label, lo, hi, tg))
        labels = [r[0] for r in clean]
        dup = sorted({x for x in labels if labels.count(x) > 1})
        if dup:
            raise OptionError(f"window labels must be unique; repeated: {dup}")
        for a, b in zip(clean, clean[1:]):
            pair = f"windows {a[0]!r} and {b[0]!r}"
            if not (a[3] < b[3]) or (a[1] is not None and b[1] is not None and not a[1] < b[1]) \
                    or (a[2] is not None and b[2] is not None and not a[2] < b[2]):
                raise OptionError(f"{pair} are not in order: lows, highs and targets must increase "
                                  f"with the visit number")
            assert a[2] is not None and b[1] is not None
            if self.overlap == "none" and not a[2] < b[1]:
                raise OptionError(f"{pair} overlap (bounds are inclusive: high {a[2]!r} >= low {b[1]!r}); "
                                  f"move a bound or pass overlap='nearest_target'")
        object.__setattr__(self, "items", tuple(clean))

    # ------------------------------------------------------------------ views
    def __len__(self) -> int:
        return len(self.items)

    @property
    def labels(self) -> list[str]:
        return [r[0] for r in self.items]

    def rows(self) -> list[list[Any]]:
        """The windows as plain lists ``[label, low, high, target]`` (JSON-ready)."""
        return [list(r) for r in self.items]

    def to_frame(self) -> pd.DataFrame:
        """One row per window: ``visit_number`` (1, 2, ...), ``label``, ``low``, ``high``, ``target``."""
        frame = pd.DataFrame(self.rows(), columns=["label", "low", "high", "target"], dtype=object)
        frame.insert(0, "visit_number", np.arange(1, len(self) + 1))
        return frame

    @classmethod
    def from_frame(cls, frame: pd.DataFrame, *, label: str = "label", low: str = "low", high: str = "high",
                   target: str = "target", overlap: Literal["none", "nearest_target"] = "none") -> Windows:
        """Windows from a small table, one row per window in visit order (missing low/high: open end)."""
        missing = [c for c in (label, low, high, target) if c not in frame.columns]
        if missing:
            raise OptionError(f"windows table needs columns {missing} (columns: {list(frame.columns)})")

        def plain(col: str) -> list[Any]:
            return [None if pd.isna(v) else v for v in frame[col].tolist()]

        return cls(tuple(zip(plain(label), plain(low), plain(high), plain(target))), overlap)

    # ------------------------------------------------------------------ numbers
    def bounds(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(lows, highs, targets) as float64; open ends as -inf / +inf."""
        lows = np.array([-np.inf if r[1] is None else r[1] for r in self.items], dtype=np.float64)
        highs = np.array([np.inf if r[2] is None else r[2] for r in self.items], dtype=np.float64)
        targets = np.array([r[3] for r in self.items], dtype=np.float64)
        return lows, highs, targets

    def __repr__(self) -> str:
        extra = f", overlap={self.overlap!r}" if self.overlap != "none" else ""
        return f"pfx.windows({self.rows()!r}{extra})"  # the call, as transforms show theirs


@checked_options
def windows(rows: Iterable[Sequence[Any]] | pd.DataFrame | Windows, *,
            overlap: Literal["none", "nearest_target"] = "none") -> Windows:
    """Planned visits with analysis windows, checked when built.

    ``rows`` lists ``(label, low, high, target)`` in visit order: inclusive bounds in study
    days (``None`` for an open end of the first or last window) and the target day.  A
    DataFrame with columns ``label``, ``low``, ``high``, ``target`` works too (see
    :meth:`Windows.from_frame` for other column names).  ``overlap="nearest_target"``
    allows overlapping windows: a day inside several goes to the one whose target is
    nearest, the earlier window on a tie.

    >>> import panelfx as pfx
    >>> w = pfx.windows([("Baseline", -14, 1, 1), ("Week 4", 15, 42, 29), ("Week 12", 71, 99, 85)])
    >>> w.labels
    ['Baseline', 'Week 4', 'Week 12']
    >>> w.to_frame()
       visit_number     label low high target
    0             1  Baseline -14    1      1
    1             2    Week 4  15   42     29
    2             3   Week 12  71   99     85
    >>> pfx.windows([("A", 0, 10, 5), ("B", 8, 20, 14)])
    Traceback (most recent call last):
    ...
    panelfx.errors.OptionError: windows 'A' and 'B' overlap (bounds are inclusive: high 10 >= low 8); ...
    """
    if isinstance(rows, Windows):
        return rows if overlap == rows.overlap else Windows(rows.items, overlap)
    if isinstance(rows, pd.DataFrame):
        return Windows.from_frame(rows, overlap=overlap)
    if isinstance(rows, (str, bytes)) or not isinstance(rows, Iterable):
        raise OptionError(f"windows must be a list of (label, low, high, target) rows, got {rows!r}")
    items: Any = tuple(tuple(r) if isinstance(r, list) else r for r in rows)  # checked by Windows
    return Windows(items, overlap)
