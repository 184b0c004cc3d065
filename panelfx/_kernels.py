"""Vectorised kernels over sorted rows and subject boundaries.

Every function takes arrays in (subject, time) order plus the :class:`~panelfx._panel.Panel`
that knows the boundaries.  Index results use -1 for "no such row".  No function loops in
Python over subjects or rows; the few loops here run over bisection or doubling steps,
about log2(longest subject) of them.
"""

from __future__ import annotations

import numpy as np

from ._panel import Panel


def take(values: np.ndarray, index: np.ndarray, fill: float = np.nan) -> np.ndarray:
    """``values[index]`` with ``fill`` where index is -1."""
    out = values[np.maximum(index, 0)]
    if out.dtype.kind != "f":
        out = out.astype("float64")
    out[index < 0] = fill
    return out


def shift_index(p: Panel, periods: int) -> np.ndarray:
    """Row ``periods`` occasions earlier in the same subject (later when negative), else -1."""
    idx = np.arange(p.n) - periods
    if periods >= 0:
        ok = p.pos >= periods
    else:
        ok = p.pos - periods < p.size
    return np.where(ok, idx, -1)


def first_index(p: Panel, mask: np.ndarray) -> np.ndarray:
    """Per row: the subject's first row where ``mask`` holds, else -1."""
    if p.n == 0:
        return np.empty(0, dtype=np.int64)
    cand = np.where(mask, np.arange(p.n), p.n)
    first = np.minimum.reduceat(cand, p.starts)
    first = np.where(first < p.n, first, -1)
    return first[p.grp]


def last_index_upto(p: Panel, mask: np.ndarray) -> np.ndarray:
    """Per row: the latest row at or before it, in the same subject, where ``mask`` holds, else -1."""
    cand = np.where(mask, np.arange(p.n), -1)
    last = np.maximum.accumulate(cand) if p.n else cand
    return np.where(last >= p.starts[p.grp], last, -1)


def last_index_in_subject(p: Panel, mask: np.ndarray) -> np.ndarray:
    """Per row: the subject's last row where ``mask`` holds, else -1."""
    if p.n == 0:
        return np.empty(0, dtype=np.int64)
    cand = np.where(mask, np.arange(p.n), -1)
    last = np.maximum.reduceat(cand, p.starts)
    return last[p.grp]


def cumsum(p: Panel, values: np.ndarray) -> np.ndarray:
    """Running sum within subject (NaN must already be replaced).

    A plain global cumulative sum minus each subject's offset loses digits as the grand
    total grows; one refinement pass on the residuals brings the error back to the size
    of a per-subject running sum.
    """
    if p.n == 0:
        return values.astype("float64")
    v = values.astype("float64", copy=False)
    s = _offset_cumsum(p, v)
    # Residual of each step, computed on subject-sized numbers, then accumulated the same way.
    step = np.empty_like(s)
    step[0] = s[0]
    np.subtract(s[1:], s[:-1], out=step[1:])
    step[p.starts] = s[p.starts]
    resid = v - step
    return s + _offset_cumsum(p, resid)


def _offset_cumsum(p: Panel, v: np.ndarray) -> np.ndarray:
    c = np.cumsum(v)
    before = c[p.starts] - v[p.starts]  # running total just before each subject
    return c - before[p.grp]


def bisect(p: Panel, query: np.ndarray, *, side: str = "left") -> np.ndarray:
    """Per row i: the first row j of i's subject with ``t[j] >= query[i]`` (side='left')
    or ``t[j] > query[i]`` (side='right'); the subject's end when there is none.

    A vectorised binary search: every row bisects its own subject at once, so the loop
    runs about log2(longest subject) times.
    """
    t = p.t
    lo = p.starts[p.grp].copy()
    hi = p.ends[p.grp].copy()
    if p.n == 0:
        return lo
    while True:
        active = lo < hi
        if not active.any():
            return lo
        mid = (lo + hi) >> 1
        tm = t[np.minimum(mid, p.n - 1)]
        go_right = (tm < query) if side == "left" else (tm <= query)
        go_right &= active
        lo = np.where(go_right, mid + 1, lo)
        hi = np.where(active & ~go_right, mid, hi)


def subject_reduce(p: Panel, ufunc: np.ufunc, values: np.ndarray) -> np.ndarray:
    """Per-subject reduction (e.g. ``np.add``) broadcast back to every row."""
    if p.n == 0:
        return values
    return ufunc.reduceat(values, p.starts)[p.grp]


class Runs:
    """Stretches of consecutive rows inside subjects, e.g. exposure restarted after a long gap.

    Carries the same boundary attributes as the Panel (``n``, ``starts``, ``ends``,
    ``grp``, ``pos``, ``size``), so :func:`cumsum`, :func:`first_index`,
    :func:`last_index_upto`, :func:`shift_index` and :func:`subject_reduce` work per run
    when given one in place of the panel.
    """

    def __init__(self, p: Panel, breaks: np.ndarray) -> None:
        is_start = (p.pos == 0) | breaks
        self.n = p.n
        self.starts = np.flatnonzero(is_start)
        self.ends = np.append(self.starts[1:], p.n)[: len(self.starts)].astype(self.starts.dtype)
        self.grp = np.cumsum(is_start) - 1
        self.pos = np.arange(p.n) - self.starts[self.grp] if p.n else np.zeros(0, dtype=np.int64)
        self.size = (self.ends - self.starts)[self.grp]


def running_count(p: Panel, mask: np.ndarray) -> np.ndarray:
    """Per row: how many rows at or before it, in the same subject, satisfy ``mask`` (int64, exact)."""
    if p.n == 0:
        return np.zeros(0, dtype=np.int64)
    m = mask.astype(np.int64)
    c = np.cumsum(m)
    before = c[p.starts] - m[p.starts]
    return c - before[p.grp]
