"""Reference: :func:`panelfx.subject_summary`, one subject at a time with plain loops."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import pandas as pd

from . import Subject, is_missing, short_decimals


def subject_summary(
    frame: pd.DataFrame,
    cols: str | Sequence[str],
    *,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    stats: str | Sequence[str] | None = None,
    area_from: Any = None,
    value_at_start: float | None = None,
    threshold: float | None = None,
    before: Any = None,
) -> pd.DataFrame:
    """What :func:`panelfx.subject_summary` should return (subjects in order of first appearance).

    The extra statistics (``stats="all"`` or a list) take ``area_from`` and ``before`` as one
    time for every subject or as a column name.
    """
    id_cols = [id] if isinstance(id, str) else list(id)
    cols = [cols] if isinstance(cols, str) else list(cols)
    is_dt = not pd.api.types.is_numeric_dtype(frame[time].dtype) or pd.api.types.is_bool_dtype(frame[time].dtype)
    unit = (unit or "D") if is_dt else None
    decimal = is_dt or short_decimals(frame[time].tolist())
    groups: dict[Any, list[int]] = {}
    for i, k in enumerate(zip(*[frame[c].tolist() for c in id_cols])):
        groups.setdefault(k, []).append(i)
    records = []
    for key, positions in groups.items():
        rows = frame.iloc[positions]
        probe = Subject(rows, [], unit, decimal)
        times = [probe.native(v) for v in rows[time].tolist()]
        order = sorted(range(len(positions)), key=lambda j: times[j])
        s = Subject(rows.iloc[order], [times[j] for j in order], unit, decimal)
        rec: dict[str, Any] = dict(zip(id_cols, key))
        rec["n_occasions"] = len(positions)
        rec["first_time"] = s.rows[time].iloc[0]
        rec["last_time"] = s.rows[time].iloc[-1]
        rec["follow_up"] = s.duration(s.times[-1], s.times[0])
        for c in cols:
            pts = [(s.duration(t, s.times[0]), float(v)) for t, v in zip(s.times, s.rows[c].tolist())
                   if not is_missing(v)]
            rec[f"{c}_n"] = len(pts)
            rec[f"{c}_first"] = pts[0][1] if pts else math.nan
            rec[f"{c}_last"] = pts[-1][1] if pts else math.nan
            rec[f"{c}_mean"] = math.fsum(v for _, v in pts) / len(pts) if pts else math.nan
            if len(pts) >= 2:
                xm = math.fsum(x for x, _ in pts) / len(pts)
                ym = rec[f"{c}_mean"]
                rec[f"{c}_slope"] = (math.fsum((x - xm) * (v - ym) for x, v in pts)
                                     / math.fsum((x - xm) ** 2 for x, _ in pts))
            else:
                rec[f"{c}_slope"] = math.nan
            rec[f"{c}_auc"] = (math.fsum((pts[k][1] + pts[k - 1][1]) / 2 * (pts[k][0] - pts[k - 1][0])
                                         for k in range(1, len(pts))) if pts else math.nan)
            if stats is not None:
                natives = [(t, float(v)) for t, v in zip(s.times, s.rows[c].tolist()) if not is_missing(v)]
                obs_times = [s.rows[time].iloc[j] for j, v in enumerate(s.rows[c].tolist()) if not is_missing(v)]
                values = [v for _, v in pts]
                rec[f"{c}_min"] = min(values) if values else math.nan
                rec[f"{c}_max"] = max(values) if values else math.nan
                rec[f"{c}_time_of_min"] = obs_times[values.index(min(values))] if values else None
                rec[f"{c}_time_of_max"] = obs_times[values.index(max(values))] if values else None
                if area_from is not None:
                    start = _time_of(area_from, s, probe)
                    rec[f"{c}_auc_from"] = _area_from(s, natives, start, value_at_start)
                if threshold is not None:
                    above = below = 0.0
                    for (x0, a), (x1, b) in zip(pts, pts[1:]):
                        above += _share(a, b, threshold) * (x1 - x0)
                        below += _share(-a, -b, -threshold) * (x1 - x0)
                    rec[f"{c}_time_above"] = above if pts else math.nan
                    rec[f"{c}_time_below"] = below if pts else math.nan
                if before is not None:
                    ref = _time_of(before, s, probe)
                    kept = [v for t, v in natives if ref is not None and t <= ref]
                    rec[f"{c}_last_before"] = kept[-1] if kept else math.nan
        records.append(rec)
    return pd.DataFrame(records)


def _time_of(option: Any, s: Subject, probe: Subject) -> float | None:
    """A start or reference time in native units: the value, or the subject's value of a column."""
    if isinstance(option, str) and option in s.rows.columns:
        v = s.rows[option].iloc[0]
        return None if is_missing(v) else probe.native(v)
    return probe.native(option)


def _share(a: float, b: float, c: float) -> float:
    """Share of the straight line from a to b strictly above c."""
    if a > c and b > c:
        return 1.0
    if a <= c and b <= c:
        return 0.0
    return (max(a, b) - c) / abs(b - a)


def _area_from(s: Subject, natives: list[tuple[float, float]], start: float | None,
               value_at_start: float | None) -> float:
    if start is None or not natives:
        return math.nan
    first = s.times[0]
    before = [(t, v) for t, v in natives if t <= start]
    after = [(t, v) for t, v in natives if t > start]
    if not after:
        return 0.0 if before and before[-1][0] == start else math.nan
    if before:
        (t0, v0), (t1, v1) = before[-1], after[0]
        v_start = v0 + (v1 - v0) * (start - t0) / (t1 - t0)
    elif value_at_start is not None:
        v_start = value_at_start
    else:
        return math.nan
    pts = [(s.duration(start, first), v_start)] + [(s.duration(t, first), v) for t, v in after]
    return math.fsum((pts[k][1] + pts[k - 1][1]) / 2 * (pts[k][0] - pts[k - 1][0]) for k in range(1, len(pts)))
