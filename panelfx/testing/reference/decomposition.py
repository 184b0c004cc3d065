"""Reference: within/between decomposition (subject mean or baseline, and the deviation),
and its nested form (level means pooled over every row of the frame, plain loops)."""

from __future__ import annotations

import math
from typing import Any

from . import Subject, is_missing, register


def _floats(values: list[Any]) -> list[float]:
    return [math.nan if is_missing(v) else float(v) for v in values]


def _used(values: list[float], fit: list[Any] | None) -> list[bool]:
    """Rows that enter the means: a value, and the fit flag true (a missing flag is false)."""
    out = []
    for i, v in enumerate(values):
        ok = not math.isnan(v)
        if fit is not None:
            f = fit[i]
            ok = ok and not is_missing(f) and bool(f)
        out.append(ok)
    return out


def _mean(values: list[float], used: list[bool]) -> float:
    kept = [v for v, u in zip(values, used) if u]
    return math.fsum(kept) / len(kept) if kept else math.nan


@register("within_between")
def within_between(tr: Any, s: Subject) -> list[list[Any]]:
    y = s.values(tr.col)
    levels = list(getattr(tr, "levels", ()))
    fit_col = getattr(tr, "fit", None)
    if not levels and fit_col is None:
        present = [v for v in y if not math.isnan(v)]
        if not present:
            level = math.nan
        elif tr.between == "mean":
            level = math.fsum(present) / len(present)
        else:
            level = present[0]
        return [[level] * len(y), [v - level for v in y]]

    assert s.whole is not None
    whole = s.whole
    all_y = _floats(whole[tr.col].tolist())
    all_fit = whole[fit_col].tolist() if fit_col is not None else None
    all_used = _used(all_y, all_fit)
    # the subject's unit at each level: the chain of codes down to it (or the code alone)
    first = s.rows.iloc[0]
    columns = {c: whole[c].tolist() for c in levels}
    means: list[float] = []
    previous = _mean(all_y, all_used) if fit_col is not None else math.nan
    for k, c in enumerate(levels):
        chain = levels[: k + 1] if tr.codes == "within_parent" else [c]
        rows = [i for i in range(len(all_y)) if all(columns[d][i] == first[d] for d in chain)]
        m = _mean([all_y[i] for i in rows], [all_used[i] for i in rows])
        if math.isnan(m) and fit_col is not None:
            m = previous  # a unit with no row used takes its parent's mean
        means.append(m)
        previous = m
    own_fit = s.rows[fit_col].tolist() if fit_col is not None else None
    m = _mean(y, _used(y, own_fit))
    if math.isnan(m) and fit_col is not None:
        m = previous
    means.append(m)
    parts = [means[0]] + [means[k] - means[k - 1] for k in range(1, len(means))]
    return [*([p] * len(y) for p in parts), [v - means[-1] for v in y]]
