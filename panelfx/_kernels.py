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
    if periods in (1, -1) and p.n:
        # The usual one-step shift needs only the subject boundaries, not pos and size.
        idx[p.starts if periods == 1 else p.ends - 1] = -1
        return idx
    if periods >= 0:
        ok = p.pos >= periods
    else:
        ok = p.pos - periods < p.size
    return np.where(ok, idx, -1)


def at_previous(p: Panel, index: np.ndarray) -> np.ndarray:
    """Per row: ``index`` as it stood at the subject's previous occasion (-1 on its first)."""
    prev = shift_index(p, 1)
    return np.where(prev >= 0, index[np.maximum(prev, 0)], -1)


def elapsed_since(p: Panel, source: np.ndarray) -> np.ndarray:
    """Per row: the time since row ``source`` as a float duration (see ``Panel.duration``), NaN where -1."""
    out = p.duration(p.t - p.t[np.maximum(source, 0)])
    out[source < 0] = np.nan
    return out


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
    """Running sum within subject (NaN must already be replaced), as accurate as a
    per-subject running sum.

    One global cumulative sum serves all subjects, but with each subject's total
    subtracted at the start of the next one, so the running total returns to about zero
    at every subject instead of growing with the row count (a global sum minus offsets
    loses digits as the grand total grows).  What is left at a subject's start is a drift
    of rounding errors; a subject whose drift is not negligible next to its own values
    (a subject of tiny values after huge ones) is recomputed exactly by a per-subject
    doubling scan, on its rows only.
    """
    v = values.astype("float64", copy=False)
    if p.n == 0 or not np.isfinite(v).all():
        return segment_scan(p, v, np.arange(p.n))
    totals = np.add.reduceat(v, p.starts)
    w = v.copy()
    w[p.starts[1:]] -= totals[:-1]
    c = np.cumsum(w, out=w)
    drift = c[p.starts] - v[p.starts]
    c -= drift[p.grp]
    size = np.add.reduceat(np.abs(v), p.starts)
    # Rounding at a drift d costs about eps * d: beyond 64 times the subject's own scale it
    # would show next to a per-subject sum (all-zero subjects with any drift go this way too).
    risky = np.abs(drift) > 64 * size
    if risky.any():
        rows = np.flatnonzero(risky[p.grp])
        c[rows] = segment_scan(p, v, rows)
    return c


def segment_scan(p: Panel, v: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Running sums within subject of ``v[rows]`` (``rows``: whole subjects, in order), by
    doubling: after the step of width d every row holds the sum of its last 2d values, so
    about log2(longest subject) vectorised steps suffice and no subject touches another."""
    out = v[rows].astype("float64", copy=True)
    pos = p.pos[rows]
    d = 1
    longest = int(pos.max()) + 1 if len(rows) else 0
    while d < longest:
        reach = pos[d:] >= d
        out[d:] = np.where(reach, out[d:] + out[:-d], out[d:])
        d *= 2
    return out


def bisect(p: Panel, query: np.ndarray, *, side: str = "left") -> np.ndarray:
    """Per row i: the first row j of i's subject with ``t[j] >= query[i]`` (side='left')
    or ``t[j] > query[i]`` (side='right'); the subject's end when there is none.

    A vectorised binary search: every row bisects its own subject at once, so the loop
    runs about log2(longest subject) times.
    """
    fast = _bisect_ranked(p, query, side)
    if fast is not None:
        return fast
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


def _bisect_ranked(p: Panel, query: np.ndarray, side: str) -> np.ndarray | None:
    """:func:`bisect` as one global search (a merge) when times are whole steps.

    Subject number and time rank make one sorted int64 key (made once per panel:
    :attr:`Panel.rank_key`); each query becomes its rank
    threshold in its own subject.  For float times the threshold
    may be off by one rank through rounding: exact comparisons on the native times then
    move each answer to the right row.  ``None`` when times are not whole steps.
    """
    cached = getattr(p, "rank_key", None)  # a Runs has none: bisect the slow way
    if cached is None:
        return None
    key, bound, origin, step, width = cached
    t = p.t
    exact = True
    if t.dtype.kind == "f":
        with np.errstate(invalid="ignore", over="ignore"):
            x = query * step - origin
        c = np.ceil(x) if side == "left" else np.floor(x)
        # Whole-number times and queries below 2**52: the arithmetic was exact, no correction.
        exact = (step == 1 and abs(origin) < 2**52 and float(np.abs(query).max()) < 2**52
                 and bool((np.floor(query) == query).all()))
        if side == "right":
            c += 1
        np.fmax(c, 0, out=c)  # NaN becomes 0: no t >= NaN, as in the loop
        np.minimum(c, bound, out=c)
        c = c.astype(np.int64)
    else:
        lo_q, hi_q = origin - step, origin + bound * step
        if lo_q < np.iinfo("int64").min or hi_q > np.iinfo("int64").max:
            return None
        d = np.clip(query, lo_q, hi_q) - origin
        c = -((-d) // step) if side == "left" else d // step + 1
        np.clip(c, 0, bound, out=c)
    c += p.grp * width
    # First key >= each query: a stable sort of queries-then-keys puts a key equal to a
    # query after it, so a query's sorted position minus the queries before it counts the
    # keys below it.  Both runs are sorted (queries too, usually): the stable sort merges
    # them in O(n), about three times faster than np.searchsorted.
    n = p.n
    order = np.argsort(np.concatenate([c, key]), kind="stable")
    at = np.flatnonzero(order < n)
    at -= np.arange(n)
    if (c[1:] >= c[:-1]).all():
        j = at
    else:
        j = np.empty(n, dtype=np.int64)
        j[order[order < n]] = at
    del order, c
    if not exact:
        first = p.starts[p.grp]
        last = p.ends[p.grp]
        while True:
            prev = t[np.maximum(j - 1, 0)]
            back = (j > first) & ((prev >= query) if side == "left" else (prev > query))
            here = t[np.minimum(j, p.n - 1)]
            ahead = (j < last) & ((here < query) if side == "left" else (here <= query))
            if not (back.any() or ahead.any()):
                break
            j = j - back + ahead
    return j


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
