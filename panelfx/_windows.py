"""Window kernels: statistics over a window of each row's own subject, vectorised.

A window is a run of consecutive sorted rows ``[lo, hi)`` inside the row's subject that
ends at the row itself (``hi = i + 1``) or just before it (``hi = i``, when the current
occasion is left out).  :class:`Bounds` holds ``lo`` and ``hi`` per row; every statistic
here takes one.  Time windows find ``lo`` exactly (:func:`window_start`): one stable merge
of integer keys when times are whole ticks (dates), else a per-subject bisection.  No function loops in Python over subjects or rows.  The loops
that remain run over a handful of window offsets (short windows), over doubling levels
(about log2 of the longest window) or over row chunks of bounded memory (median).

How each statistic is computed, and why:

- count, sum, mean: for short windows (at most :data:`DIRECT_MAX` rows) the values are
  added directly, offset by offset (exact to rounding).  Longer windows take differences
  of per-subject prefix sums (:func:`panelfx._kernels.cumsum`, compensated); counts use
  an exact integer prefix sum.  Cost O(n) plus one O(n) gather per end.  Each row's
  rounding is bounded from the magnitudes the prefix sums went through; rows where that
  bound exceeds :data:`SUM_RTOL` of the result (small windows after a huge value) are
  added up directly instead.
- var, std: sample variance (divisor n - 1).  Short windows: two passes over the window
  values (mean first, then squared deviations).  Longer windows: prefix sums of values
  centred by the subject's mean, so the squares stay small; each row's rounding error is
  bounded from the prefix sums it used, and rows where that bound is not small against
  the result (a flat window after a large swing, say) are recomputed by two passes.
- min, max: short windows directly; longer ones by a sparse table (level k holds the
  extreme of 2**k consecutive rows), answering each row at its own level with two
  overlapping blocks.  O(n log w) time, O(n) memory: levels are built one at a time.
- median: the window values of a chunk of rows are gathered into a padded matrix (rows
  grouped by window length in powers of two, so padding at most doubles the work),
  sorted along the rows (missing values sort last) and the middle one or two taken.
  O(n w log w) time for windows of w rows; memory bounded by :data:`CHUNK_CELLS`.

Missing values (NaN) never enter a statistic: each window uses its non-missing values.
Infinite values follow IEEE arithmetic: a sum holding +inf is +inf, one holding both
+inf and -inf is NaN, and var / std of a window holding an infinity are NaN.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from . import _kernels as K
from ._panel import NAT, Panel

#: Windows of at most this many rows are summed directly, offset by offset.
DIRECT_MAX = 4

#: Cells (rows x window length) of one padded matrix in :func:`padded_apply`.
CHUNK_CELLS = 1 << 21

#: Relative rounding error accepted for a window sum / variance from prefix sums before
#: the row is recomputed directly.
SUM_RTOL = 1e-10
VAR_RTOL = 1e-10

CLOSED = ("right", "both", "left", "neither")

_EPS = np.finfo("float64").eps


@dataclass(frozen=True)
class Bounds:
    """Window of every sorted row i: rows ``lo[i] .. i - end`` (none when ``length`` is 0).

    ``end`` is 0 when the window ends at the current occasion and 1 when it ends just
    before it; ``length = hi - lo`` with ``hi = i + 1 - end``.
    """

    lo: np.ndarray
    hi: np.ndarray
    length: np.ndarray
    end: int
    width: int  # the longest window


def bounds(
    p: Panel,
    *,
    occasions: int | None = None,
    span: float | int | None = None,
    closed: str = "right",
    exclude_current: bool = False,
) -> Bounds:
    """Windows by occasions (the last ``occasions`` rows), by time (``span`` in native
    units, with ``closed`` ends), or the whole history so far when both are None.

    For a time window ending at the current time t: "right" is (t - span, t], "both"
    [t - span, t], "left" [t - span, t) and "neither" (t - span, t).  Times are unique
    within a subject, so an open right end simply leaves the current occasion out.
    """
    i = np.arange(p.n)
    end = 1 if exclude_current or (span is not None and closed in ("left", "neither")) else 0
    hi = i + 1 - end
    if occasions is not None:
        lo = np.maximum(p.starts[p.grp], hi - occasions)
    elif span is not None:
        lo = window_start(p, span, side="left" if closed in ("both", "left") else "right")
        # t - span can round to t for float times far from zero: such a window is empty.
        lo = np.minimum(lo, hi)
    else:
        lo = p.starts[p.grp]
    length = hi - lo
    return Bounds(lo=lo, hi=hi, length=length, end=end, width=int(length.max()) if p.n else 0)


def _minus(t: np.ndarray, span: float | int) -> np.ndarray:
    """t - span, exact for integer (nanosecond) times and saturating instead of wrapping."""
    if t.dtype.kind == "f":
        return t - float(span)
    s = np.int64(span)
    if t.size and t.min() < NAT + 1 + s:
        return np.where(t < NAT + 1 + s, NAT + 1, t - s)
    return t - s


def window_start(p: Panel, span: float | int, *, side: str) -> np.ndarray:
    """Per row: the first row of its subject with time >= t - span (side "left") or
    > t - span (side "right").

    When every time is a whole number of some tick (whole days for dates, say) the
    subject number and the time in ticks since the subject's first occasion make one
    integer key that grows along the sorted rows; the queries (key - span) grow too, so
    one stable sort of both, which merges two sorted runs in O(n), places every query
    among the keys exactly.  Otherwise (or when that key would not fit in 64 bits) the
    per-subject bisection of :func:`panelfx._kernels.bisect` does.
    """
    keyed = _tick_keys(p, span)
    if keyed is None:
        return K.bisect(p, _minus(p.t, span), side=side)
    key, width = keyed
    n = key.size
    # Stable order puts keys equal to a query before it ("right": count keys <= query)
    # or after it ("left": count keys < query); a query's rank minus its number is the
    # count of keys before it, i.e. the first row of its window.
    if side == "right":
        order = np.argsort(np.concatenate([key, key - width]), kind="stable")
        return np.flatnonzero(order >= n) - np.arange(n)
    order = np.argsort(np.concatenate([key - width, key]), kind="stable")
    return np.flatnonzero(order < n) - np.arange(n)


def _tick_keys(p: Panel, span: float | int) -> tuple[np.ndarray, int] | None:
    """(subject * R + ticks since the subject's first time, span in ticks), or None."""
    t = p.t
    if p.n == 0:
        return None
    if t.dtype.kind == "f":
        if not float(span).is_integer() or t.min() < -(2.0**53) or t.max() > 2.0**53 or not np.all(t == np.floor(t)):
            return None
        t = t.astype(np.int64)
    span_i = int(span)
    if int(t.max()) - int(t.min()) >= 2**62:
        return None
    rel = t - t[p.starts][p.grp]
    # The gcd over a first slice bounds the gcd over all rows: when it is 1, so is the whole.
    tick = int(np.gcd(np.gcd.reduce(rel[:4096]), span_i))
    if tick > 1:
        tick = int(np.gcd(np.gcd.reduce(rel), tick))
    if tick > 1:
        rel = rel // tick
    width = span_i // tick
    r = int(rel.max()) + width + 1  # a subject's keys and queries stay inside its own block of r
    if r * p.n_subjects >= 2**62:
        return None
    return rel + p.grp.astype(np.int64, copy=False) * r, width


# ---------------------------------------------------------------------- count, sum
def count(b: Bounds, mask: np.ndarray) -> np.ndarray:
    """Number of rows of each window where ``mask`` holds (int64, exact)."""
    if mask.all():
        return b.length.astype(np.int64, copy=True)
    if b.width <= DIRECT_MAX:
        return _direct(b, mask.astype(np.int64), np.add, 0).astype(np.int64)
    c = np.zeros(mask.size + 1, dtype=np.int64)
    np.cumsum(mask, out=c[1:])
    return c[b.hi] - c[b.lo]


def total(p: Panel, b: Bounds, v0: np.ndarray) -> np.ndarray:
    """Sum over each window of ``v0`` (missing values already replaced by 0); 0 when empty.

    Long windows take differences of running totals, which lose digits where the totals
    dwarf the window's own sum (a large value earlier in the subject): rows whose
    rounding bound exceeds :data:`SUM_RTOL` of the result are added up directly instead.
    """
    if b.width <= DIRECT_MAX:
        return _direct(b, v0, np.add, 0.0)
    prefix = K.cumsum(p, v0)
    top, bottom = _prefix_ends(p, b, prefix)
    del prefix  # arrays of n floats are freed or reused as soon as possible: memory peaks here
    out = top - bottom
    del bottom
    out[b.length == 0] = 0.0
    # For values >= 0 the subject's running sum of |v| is the prefix sum itself.
    if v0.size and v0.min() >= 0:
        top += p.n * _EPS * float(v0.sum())
        scale = top
    else:
        del top
        scale = _magnitude(p, b, v0)
    scale *= 8 * _EPS
    bound = scale
    redo = np.flatnonzero((bound > SUM_RTOL * np.abs(out)) & (b.length > 0))
    del bound, scale
    if redo.size:
        # A window of zeros sums to exactly 0 from the prefix sums too: no need to redo it.
        nz = count(b, v0 != 0)
        redo = redo[nz[redo] > 0]
        out[redo] = padded_apply(v0, b, redo, _sum_of_rows)
    return out


def _prefix_ends(p: Panel, b: Bounds, prefix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Inclusive per-subject prefix at the window's last row and just before its first row;
    their difference is the window sum (meaningless for empty windows)."""
    before = np.empty_like(prefix)  # sum of the subject's rows before row j, exactly 0 at starts
    if p.n:
        before[1:] = prefix[:-1]
        before[p.starts] = 0.0
    return prefix[np.maximum(b.hi - 1, 0)], before[b.lo]


def _magnitude(p: Panel, b: Bounds, v: np.ndarray) -> np.ndarray:
    """Per row: what the rounding of a window sum from prefix sums scales with.

    That is the sum of |v| over the subject's rows up to the window's end (prefix sums
    of the subject pass through every partial sum on the way), plus n * eps times the
    sum of |v| over all rows, for the digits the running total shared by all subjects
    leaves behind (a generous allowance: such errors grow like sqrt(n) in practice).
    """
    a = np.abs(v)
    run = np.cumsum(a)
    if p.n == 0:
        return run
    before = (run[p.starts] - a[p.starts])[p.grp]
    return run[np.maximum(b.hi - 1, 0)] - before + p.n * _EPS * run[-1]


def _sum_of_rows(vals: np.ndarray, c: np.ndarray) -> np.ndarray:
    return np.nansum(vals, axis=1)


def _direct(b: Bounds, v: np.ndarray, ufunc: np.ufunc, start: float | int) -> np.ndarray:
    """Reduce each (short) window offset by offset: ``ufunc`` over v[i - end - d], d < length."""
    n = v.size
    out = np.full(n, start, dtype=np.result_type(v.dtype, type(start)))
    for d in range(b.width):
        s = b.end + d
        if s >= n:
            break
        # in place where the window reaches back d rows (half the passes of np.where)
        ufunc(out[s:], v[: n - s], out=out[s:], where=b.length[s:] > d)
    return out


# ---------------------------------------------------------------------- var, std
def variance(p: Panel, b: Bounds, y: np.ndarray, valid: np.ndarray, cnt: np.ndarray) -> np.ndarray:
    """Sample variance of the non-missing values of each window; NaN below two values.

    ``y`` must be finite where ``valid`` (infinities are the caller's business).
    """
    out = np.full(p.n, np.nan)
    enough = cnt >= 2
    if b.width <= DIRECT_MAX:
        rows = np.flatnonzero(enough)
        out[rows] = padded_apply(y, b, rows, _two_pass_var)
        return out
    # Centre by the subject mean so that prefix sums of squares stay of the window's size.
    n_valid = K.subject_reduce(p, np.add, valid.astype(np.float64))
    v0 = np.where(valid, y, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        centre = K.subject_reduce(p, np.add, v0) / n_valid
    w = np.where(valid, y - np.where(n_valid > 0, centre, 0.0), 0.0)
    ww = w * w
    t1, b1 = _prefix_ends(p, b, K.cumsum(p, w))
    t2, b2 = _prefix_ends(p, b, K.cumsum(p, ww))
    s1 = np.where(b.length > 0, t1 - b1, 0.0)
    s2 = np.where(b.length > 0, t2 - b2, 0.0)
    safe_cnt = np.maximum(cnt, 1)
    num = s2 - s1 * s1 / safe_cnt
    # Rounding bound of num: of s2, and of s1 as it enters s1**2 / count (see _magnitude).
    bound = 8 * _EPS * (_magnitude(p, b, ww) + np.abs(s2) + 2 * np.abs(s1) * _magnitude(p, b, w) / safe_cnt)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(enough, np.maximum(num, 0.0) / (cnt - 1), np.nan)
    redo = np.flatnonzero(enough & (bound > VAR_RTOL * num))
    if redo.size:
        out[redo] = padded_apply(y, b, redo, _two_pass_var)
    return out


def _two_pass_var(vals: np.ndarray, c: np.ndarray) -> np.ndarray:
    # Corrected two-pass formula: the second term removes the rounding error of the mean.
    mean = np.nansum(vals, axis=1) / c
    dev = vals - mean[:, None]
    return np.maximum(np.nansum(dev * dev, axis=1) - np.nansum(dev, axis=1) ** 2 / c, 0.0) / (c - 1)


# ---------------------------------------------------------------------- min, max
def extreme(b: Bounds, y: np.ndarray, ufunc: np.ufunc) -> np.ndarray:
    """Minimum (``np.fmin``) or maximum (``np.fmax``) of the non-missing values of each window."""
    n = y.size
    if b.width <= DIRECT_MAX:
        out = _direct(b, y, ufunc, np.nan)  # fmin/fmax skip NaN
        out[b.length == 0] = np.nan
        return out
    out = np.full(n, np.nan)
    has = b.length > 0
    level_of = np.frexp(np.maximum(b.length, 1))[1] - 1  # floor(log2(length)), exact
    top = int(level_of[has].max())
    level = y.astype(np.float64, copy=True)  # level k: extreme of rows j .. j + 2**k - 1
    h = 1
    for k in range(top + 1):
        rows = np.flatnonzero(has & (level_of == k))
        lo = b.lo[rows]
        out[rows] = ufunc(level[lo], level[lo + b.length[rows] - h])
        if k < top:
            ufunc(level[: n - h], level[h:], out=level[: n - h])  # numpy buffers the overlap
            h *= 2
    return out


# ---------------------------------------------------------------------- median
def median(b: Bounds, y: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Median of the non-missing values of each window at ``rows`` (each must hold one)."""
    return padded_apply(y, b, rows, _median_of_rows)


def _median_of_rows(vals: np.ndarray, c: np.ndarray) -> np.ndarray:
    vals.sort(axis=1)  # NaN sorts last, so the c valid values come first
    c = c.astype(np.int64)
    a = np.take_along_axis(vals, ((c - 1) // 2)[:, None], axis=1)[:, 0]
    z = np.take_along_axis(vals, (c // 2)[:, None], axis=1)[:, 0]
    return np.where(c % 2 == 1, a, (a + z) / 2)


# ---------------------------------------------------------------------- padded windows
def padded_apply(
    y: np.ndarray,
    b: Bounds,
    rows: np.ndarray,
    fn: Callable[[np.ndarray, np.ndarray], np.ndarray],
) -> np.ndarray:
    """``fn(values, counts)`` on padded matrices of the windows of ``rows``.

    Each matrix row holds one window's values, NaN-padded on the right; ``counts`` are
    its non-missing values (at least one).  Rows are grouped by window length in powers
    of two and cut into chunks of at most :data:`CHUNK_CELLS` cells.
    """
    out = np.empty(rows.size)
    if rows.size == 0:
        return out
    n = y.size
    length = b.length[rows]
    bucket = np.frexp(np.maximum(length - 1, 0))[1]  # ceil(log2(length)); 0 for length 1
    order = np.argsort(bucket, kind="stable")
    edges = np.flatnonzero(np.diff(bucket[order])) + 1
    for group in np.split(order, edges):
        width = int(length[group].max())
        step = max(1, CHUNK_CELLS // width)
        cols = np.arange(width)
        for at in range(0, group.size, step):
            g = group[at: at + step]
            idx = b.lo[rows[g]][:, None] + cols
            vals = y[np.minimum(idx, n - 1)]
            vals[cols >= length[g][:, None]] = np.nan
            c = np.count_nonzero(~np.isnan(vals), axis=1)
            out[g] = fn(vals, c)
    return out
