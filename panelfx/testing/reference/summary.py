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
) -> pd.DataFrame:
    """What :func:`panelfx.subject_summary` should return (subjects in order of first appearance)."""
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
        records.append(rec)
    return pd.DataFrame(records)
