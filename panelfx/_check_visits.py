"""The planned-visit findings of :func:`panelfx.check`: missed, early, late, extra, no_day.

Two ways to state the plan, one matching rule (that of :func:`panelfx.analysis_visit`):

- planned times (``spacing`` or ``schedule``), counted from each subject's first occasion:
  every occasion goes to the nearest planned time (the earlier one on a tie), i.e. to
  windows that split the time between planned times at the midpoints; ``tolerance`` only
  says when it is ``early`` / ``late``;
- ``windows`` in study days: every occasion goes to the window that holds its day; one
  outside every window is ``early`` / ``late`` against the nearest target.

In both, the occasion of a planned visit nearest its planned time is the visit (the
earlier on a tie) and the others are ``extra``,
and a planned visit up to the subject's last one with no occasion is ``missed``.  Each
actual occasion is reported at most once (duplicates are reported as such by ``check``).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from fractions import Fraction
from typing import Any

import numpy as np
import pandas as pd

from . import _visits as V
from ._panel import Panel
from .errors import OptionError
from .transforms.analysis_visit import day_values
from .visit_windows import Windows
from .visit_windows import windows as make_windows

Rows = Callable[[np.ndarray, str, Any], pd.DataFrame]  # (frame positions, problem, detail) -> report part


def _fmt(x: float) -> str:
    return repr(float(x)) if not float(x).is_integer() or abs(x) >= 1e16 else str(int(x))


def planned_findings(panel: Panel, positions: np.ndarray, rows: Rows, *, spacing: Any, schedule: Any,
                     tolerance: Any) -> list[pd.DataFrame]:
    """Findings against planned times counted from each subject's first occasion."""
    if spacing is not None:
        step = panel.span(spacing, "spacing")
        if step <= 0:
            raise OptionError(f"spacing must be positive, got {spacing!r}")
        tol_one = step / 4 if tolerance is None else panel.span(tolerance, "tolerance")
        if tol_one < 0:
            raise OptionError(f"tolerance must not be negative, got {tolerance!r}")
        rel = _relative(panel)
        top = float(rel.max()) if len(rel) else 0.0
        count = int(math.floor(top / float(step))) + 2  # planned occasions up to just past the last one
        planned: list[Any] = [step * i for i in range(count)]
        tols: list[Any] = [tol_one] * count
    else:
        if isinstance(schedule, (str, bytes)) or not isinstance(schedule, Sequence) or not len(schedule):
            raise OptionError(f"schedule must be a non-empty list of planned times, got {schedule!r}")
        if tolerance is None:
            raise OptionError("schedule= needs tolerance= (one allowed distance, or one per planned time)")
        planned = [panel.span(p, "schedule") for p in schedule]
        if any(b <= a for a, b in zip(planned, planned[1:])):
            raise OptionError(f"schedule must increase strictly, got {list(schedule)!r}")
        given = list(tolerance) if isinstance(tolerance, (list, tuple)) else [tolerance] * len(planned)
        if len(given) != len(planned):
            raise OptionError(f"tolerance has {len(given)} values for {len(planned)} planned times")
        tols = [panel.span(x, "tolerance") for x in given]
        if any(x < 0 for x in tols):
            raise OptionError(f"tolerance must not be negative, got {tolerance!r}")
        rel = _relative(panel)
    if panel.n == 0:
        return []
    s = panel.subjects
    binary = rel.dtype.kind == "f"
    if binary:
        p = np.array([float(x) for x in planned])
        mids = (p[1:] + p[:-1]) / 2
        slot = np.searchsorted(mids, rel, side="left")  # at a midpoint: the earlier planned time
        lo = np.array([float(a) - float(b) for a, b in zip(planned, tols)])
        hi = np.array([float(a) + float(b) for a, b in zip(planned, tols)])
    else:
        starts = np.array([_clamp(math.floor((Fraction(a) + Fraction(b)) / 2) + 1)
                           for a, b in zip(planned, planned[1:])], dtype=np.int64)
        slot = np.searchsorted(starts, rel, side="right")
        lo = np.array([_clamp(math.ceil(Fraction(a) - Fraction(b))) for a, b in zip(planned, tols)], dtype=np.int64)
        hi = np.array([_clamp(math.floor(Fraction(a) + Fraction(b))) for a, b in zip(planned, tols)], dtype=np.int64)
    slot = slot.astype(np.int64)
    pf = np.array([float(x) for x in planned])
    dev = rel.astype(np.float64) - pf[slot]
    extra = _later_in_slot(s, slot, panel.repeated, np.abs(dev))
    plain = ~extra & ~panel.repeated
    tol_words = [repr(float(panel.duration(np.array([float(x)]))[0])) for x in tols]
    parts = []
    for problem, mask, text in (("early", plain & (rel < lo[slot]), " before"),
                                ("late", plain & (rel > hi[slot]), " after")):
        where = np.flatnonzero(mask)
        if len(where):
            dist = pd.Series(panel.duration(np.abs(dev[where]))).round(6).astype(str)
            detail = (dist + text + " scheduled occasion " + pd.Series(slot[where]).astype(str)
                      + " (tolerance " + pd.Series(np.asarray(tol_words, dtype=object)[slot[where]]) + ")")
            parts.append(rows(positions[panel.original_positions(where)], problem, detail))
    where = np.flatnonzero(extra)
    if len(where):
        detail = ("second visit matched to scheduled occasion " + pd.Series(slot[where]).astype(str)
                  + " (another is nearer the planned time)")
        parts.append(rows(positions[panel.original_positions(where)], "extra", detail))
    # missed: planned occasions 0 .. the subject's last occasion's, with no occasion
    last = np.maximum.reduceat(slot, s.starts)
    subj, k = _missing_slots(s, slot, last + 1)
    if len(k):
        first_t = panel.t[s.starts[subj]]
        if binary:
            expected = first_t + pf[k]
        else:
            off = np.array([_clamp(math.floor(Fraction(x))) for x in planned], dtype=np.int64)
            expected = first_t + off[k]
        part = rows(positions[panel.original_positions(s.starts[subj])], "missed", "")
        part["row"] = None
        part["time"] = panel.native_to_time(expected).to_numpy(dtype=object)
        part["detail"] = ("scheduled occasion " + pd.Series(k).astype(str) + " has no visit").to_numpy(dtype=object)
        parts.append(part)
    return parts


def window_findings(panel: Panel, positions: np.ndarray, rows: Rows, *, windows: Any,
                    day: str | None) -> list[pd.DataFrame]:
    """Findings against analysis windows in study days (the rule of :func:`panelfx.analysis_visit`).
    Parts carry a private column ``_day`` (the study day of the occasion, the target of a missed
    visit) for figures; :func:`panelfx.check` keeps only its report columns."""
    w = windows if isinstance(windows, Windows) else make_windows(windows)
    d = day_values(panel, day, "check(windows=...)")
    if panel.n == 0:
        return []
    s = panel.subjects
    k = V.assign(d, w)
    lows, highs, targets = w.bounds()
    labels = np.asarray(w.labels, dtype=object)
    present = ~np.isnan(d)
    parts = []
    live = ~panel.repeated

    def where_text(idx: np.ndarray) -> pd.Series:
        return pd.Series([f"planned visit {labels[j]!r} (target {_fmt(targets[j])}, window "
                          f"{_fmt(lows[j]) if np.isfinite(lows[j]) else 'open'} to "
                          f"{_fmt(highs[j]) if np.isfinite(highs[j]) else 'open'})" for j in idx], dtype=object)

    outside = np.flatnonzero(live & present & (k < 0))
    if len(outside):
        near = _nearest_target(d[outside], targets)
        signed = V.distance(d[outside], near, w) * np.where(d[outside] < targets[near], -1, 1)
        for problem, mask, text in (("early", signed < 0, " before "), ("late", signed > 0, " after ")):
            if mask.any():
                dist = pd.Series(np.abs(signed[mask])).map(_fmt)
                detail = dist + text + where_text(near[mask]) + "; outside every window"
                part = rows(positions[panel.original_positions(outside[mask])], problem, detail.to_numpy())
                parts.append(part.assign(_day=d[outside[mask]]))
    dist = np.nan_to_num(V.distance(d, k, w), nan=np.inf)
    extra = np.flatnonzero(_later_in_slot(s, k, panel.repeated, dist) & (k >= 0) & live)
    if len(extra):
        detail = "second record in the window of " + where_text(k[extra]) + " (another is nearer the target)"
        parts.append(rows(positions[panel.original_positions(extra)], "extra", detail.to_numpy()).assign(_day=d[extra]))
    no_day = np.flatnonzero(live & ~present)
    if len(no_day):
        parts.append(rows(positions[panel.original_positions(no_day)], "no_day",
                          f"study day {day!r} is missing: the record cannot be matched to a planned visit"))
    # missed: windows starting on or before the subject's last day (always the first), with no record
    last_day = np.fmax.reduceat(d, s.starts)
    with np.errstate(invalid="ignore"):
        due = np.where(np.isnan(last_day), 0, np.searchsorted(lows, last_day, side="right"))
    due = np.maximum(due, 1).astype(np.int64)
    subj, j = _missing_slots(s, k, due)
    if len(j):
        part = rows(positions[panel.original_positions(s.starts[subj])], "missed", "")
        part["row"] = None
        # the planned time when the time column holds the study days; unknown otherwise
        part["time"] = pd.Series(targets[j], dtype="float64").to_numpy(dtype=object) if day is None else None
        part["detail"] = (where_text(j) + " has no record").to_numpy(dtype=object)
        parts.append(part.assign(_day=targets[j]))
    return parts


def _clamp(x: int) -> int:
    return max(min(int(x), V.INT_MAX), V.INT_MIN + 1)


def _relative(panel: Panel) -> np.ndarray:
    """Times since the subject's first occasion: int64 ticks, or float64 on binary float axes."""
    t = panel.t
    if not len(t):
        return t
    return t - t[panel.subjects.first]


def _later_in_slot(s: Any, slot: np.ndarray, repeated: np.ndarray, dist: np.ndarray) -> np.ndarray:
    """Rows that are not their subject's visit of their slot: the visit is the row nearest the
    planned time (``dist``), the earlier on a tie.  Duplicates of the row before are left to
    the duplicate finding."""
    n = s.n
    if n == 0:
        return np.zeros(0, dtype=bool)
    rows = np.arange(n)
    order = np.lexsort((rows, dist, slot, s.grp))
    g, k = s.grp[order], slot[order]
    head = np.ones(n, dtype=bool)
    head[1:] = (g[1:] != g[:-1]) | (k[1:] != k[:-1])
    later = np.empty(n, dtype=bool)
    later[order] = ~head
    return later & ~repeated & (slot >= 0)


def _missing_slots(s: Any, slot: np.ndarray, due: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(subject, slot) of the slots 0 .. due-1 of each subject that hold no row, in order."""
    total = int(due.sum())
    start = np.cumsum(due) - due
    has = np.zeros(total, dtype=bool)
    ok = (slot >= 0) & (slot < due[s.grp])
    has[start[s.grp[ok]] + slot[ok]] = True
    subj = np.repeat(np.arange(len(due)), due)
    k = np.arange(total) - start[subj]
    return subj[~has], k[~has]


def _nearest_target(day: np.ndarray, targets: np.ndarray) -> np.ndarray:
    """Index of the nearest target (the earlier on a tie), exact for decimals."""
    d, t, _ = V.exact_scale(day, targets)
    j = np.searchsorted(t, d, side="left")
    below = np.maximum(j - 1, 0)
    above = np.minimum(j, len(t) - 1)
    take_above = (j < len(t)) & ((j == 0) | (np.abs(t[above] - d) < np.abs(d - t[below])))
    return np.where(take_above, above, below).astype(np.int64)


__all__ = ["planned_findings", "window_findings"]
