"""Window kernels: statistics over a window of each row's own subject, vectorised.

A window is a run of consecutive sorted rows ``[lo, hi)`` inside the row's subject that
ends at the row itself (``hi = i + 1``) or just before it (``hi = i``, when the current
occasion is left out).  :class:`Bounds` holds ``lo`` and ``hi`` per row; every statistic
here takes one.  Time windows find ``lo`` exactly: the panel's one search within subjects
(:meth:`panelfx._panel.Panel.first_at_or_after`) on the time axis' integer key, with the
threshold t - span computed exactly by the time axis.  No function loops in Python over
subjects or rows.  The loops
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

from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from . import _kernels as K
from ._kernels import _SCALE_DOWN, _SCALE_UP
from ._panel import Panel
from ._subjects import Subjects

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
    """Window of every sorted row i: rows ``lo[i] .. hi[i] - 1`` (none when ``length`` is 0).

    ``end`` is 0 when the window ends at the current occasion and 1 when it ends just
    before it, so that ``hi = i + 1 - end``; -1 when the ends are irregular (an open right
    end that also leaves out tied rows at the current time).  ``aligned``: window i belongs
    to sorted row i of the same rows and ``hi = i + 1 - end`` holds (as :func:`bounds`
    makes them; windows of panel rows over a side table's records are not), so kernels may
    read the window ends as shifted slices instead of gathering them.
    """

    lo: np.ndarray
    stop: np.ndarray | None  # hi, or None when aligned: then hi = i + 1 - end, made on demand
    length: np.ndarray
    end: int
    width: int  # the longest window
    aligned: bool = False

    @property
    def hi(self) -> np.ndarray:
        """One past the window's last row, per row (aligned windows keep no copy: 8 bytes a row
        less while a transform runs)."""
        if self.stop is not None:
            return self.stop
        return np.arange(1 - self.end, len(self.lo) + 1 - self.end)


def bounds(
    p: Panel,
    *,
    occasions: int | None = None,
    span: Fraction | float | None = None,
    closed: str = "right",
    exclude_current: bool = False,
) -> Bounds:
    """Windows by occasions (the last ``occasions`` rows), by time (``span`` in native
    units, with ``closed`` ends), or the whole history so far when both are None.

    For a time window ending at the current time t: "right" is (t - span, t], "both"
    [t - span, t], "left" [t - span, t) and "neither" (t - span, t).  Times are unique
    within a subject, so an open right end simply leaves the current occasion out.
    """
    s = p.subjects
    open_right = span is not None and closed in ("left", "neither")
    end = 1 if exclude_current or open_right else 0
    first_after = None
    if occasions is None and span is not None:  # before hi exists: the search's temporaries peak here
        # first occasion at or after t - span ([ closed left end) or after it (open)
        first_after = p.first_at_or_after(p.axis.back(span, strict=closed not in ("both", "left")), scratch=True)
    hi = np.arange(1 - end, p.n + 1 - end)
    if open_right and p.has_ties:
        # [t - s, t) leaves out every row at time t, tied rows earlier in the order too
        hi = np.minimum(hi, p.first_at_or_after(p.axis.key))
        end = -1
    if occasions is not None:
        lo = np.maximum(s.first, hi - occasions)
    elif first_after is not None:
        lo = np.minimum(first_after, hi, out=first_after)
    else:
        lo = s.first
    length = hi - lo
    aligned = end >= 0
    return Bounds(lo=lo, stop=None if aligned else hi, length=length, end=end,
                  width=int(length.max()) if p.n else 0, aligned=aligned)


# ---------------------------------------------------------------------- count, sum
def count(b: Bounds, mask: np.ndarray) -> np.ndarray:
    """Number of rows of each window where ``mask`` holds (int64, exact)."""
    if mask.all():
        return b.length.astype(np.int64, copy=True)
    # Integer prefix sums are exact: one difference per row, whatever the window's length.
    c = np.empty(mask.size + 1, dtype=np.int64)
    c[0] = 0
    np.cumsum(mask, out=c[1:])
    if b.aligned:  # hi = i + 1 - end: a slice, not a gather
        below = c[b.lo]
        return np.subtract(c[1 - b.end: mask.size + 1 - b.end], below, out=below)
    return c[b.hi] - c[b.lo]


def total(s: Subjects, b: Bounds, v0: np.ndarray) -> np.ndarray:
    """Sum over each window of ``v0`` (finite; missing values already replaced by 0); 0 when empty.

    Long windows take differences of running totals, which lose digits where the totals
    dwarf the window's own sum (a large value earlier in the subject) and overflow where
    they pass the float64 maximum: rows whose rounding bound exceeds :data:`SUM_RTOL` of
    the result, or whose result is not finite, are added up directly instead.
    """
    if b.width <= DIRECT_MAX:
        with np.errstate(over="ignore", invalid="ignore"):
            out = _direct(b, v0, np.add, 0.0)
        over = np.flatnonzero(~np.isfinite(out))
        if over.size:  # an overflow on the way: add again, scaled
            out[over] = padded_apply(v0, b, over, _sum_of_rows)
        return out
    out = _total_by_prefix(s, b, v0, b.aligned)
    # Short windows are always added directly, whatever other rows' windows are, so that a
    # row's sum never depends on the other subjects (the same path, to the last bit).
    if b.aligned:
        # every row's direct sum over its last DIRECT_MAX rows, the prefix result beyond
        with np.errstate(over="ignore", invalid="ignore"):
            out = _direct(b, v0, np.add, 0.0, depth=DIRECT_MAX, beyond=out)
        over = np.flatnonzero(~np.isfinite(out))
        over = over[b.length[over] <= DIRECT_MAX]  # an overflow on the way: add again, scaled
        if over.size:
            out[over] = padded_apply(v0, b, over, _sum_of_rows)
        return out
    short = np.flatnonzero((b.length <= DIRECT_MAX) & (b.length > 0))
    if short.size:
        with np.errstate(over="ignore", invalid="ignore"):
            acc = np.zeros(short.size)
            hi, length = b.hi[short], b.length[short]
            for d in range(DIRECT_MAX):
                np.add(acc, v0[np.maximum(hi - 1 - d, 0)], out=acc, where=length > d)
        out[short] = acc
        over = short[~np.isfinite(acc)]
        if over.size:
            out[over] = padded_apply(v0, b, over, _sum_of_rows)
    return out


def _total_by_prefix(s: Subjects, b: Bounds, v0: np.ndarray, long_only: bool = False) -> np.ndarray:
    """:func:`total` from differences of per-subject prefix sums, rows at risk added directly.

    ``long_only``: the caller replaces windows of at most :data:`DIRECT_MAX` rows, so only
    longer ones at risk are added directly here."""
    prefix = K.cumsum(s, v0)
    top, bottom = _prefix_ends(s, b, prefix)
    # For values >= 0 the running sum of |v| is the prefix sum itself, bit for bit.
    nonneg = not v0.size or v0.min() >= 0
    del prefix  # arrays of n floats are freed or reused as soon as possible: memory peaks here
    with np.errstate(invalid="ignore", over="ignore"):
        out = np.subtract(top, bottom, out=bottom)
    del bottom
    out[b.length == 0] = 0.0
    if nonneg and b.aligned and b.end == 0:
        # the same test as below, a block of rows at a time: no temporaries of n values
        redo = _at_risk(s, b, out, top, DIRECT_MAX if long_only else 0)
    else:
        bound = _rounding(s, b, top if nonneg else None, v0)
        with np.errstate(invalid="ignore"):
            redo = np.flatnonzero(((bound > SUM_RTOL * np.abs(out)) | ~np.isfinite(out)) & (b.length > 0))
        if long_only:
            redo = redo[b.length[redo] > DIRECT_MAX]
        del bound
    del top
    if redo.size:
        # A window of zeros sums to exactly 0 from the prefix sums too: no need to redo it.
        nz = count(b, v0 != 0)
        redo = redo[nz[redo] > 0]
        out[redo] = padded_apply(v0, b, redo, _sum_of_rows)
    return out


def _at_risk(s: Subjects, b: Bounds, out: np.ndarray, top: np.ndarray, longer: int) -> np.ndarray:
    """Rows of aligned windows ending at their own row (``end`` 0) whose sum from prefix sums of
    values >= 0 may have lost digits: the test of :func:`_total_by_prefix` (bound from
    :func:`_rounding` above SUM_RTOL of the result, or not finite), windows longer than
    ``longer`` rows only, taken a block of rows at a time."""
    found = []
    step = _BLOCK * 8
    with np.errstate(invalid="ignore"):
        for a in range(0, s.n, step):
            z = min(a + step, s.n)
            bound = np.add(s.pos[a:z], 2, dtype=np.float64)  # exact, as in _rounding
            bound *= 2 * _EPS
            bound *= top[a:z]
            o = out[a:z]
            risk = bound > SUM_RTOL * np.abs(o)
            risk |= ~np.isfinite(o)
            risk &= b.length[a:z] > longer
            found.append(np.flatnonzero(risk) + a)
    return np.concatenate(found) if found else np.zeros(0, dtype=np.int64)


def _prefix_ends(s: Subjects, b: Bounds, prefix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Inclusive per-subject prefix at the window's last row and just before its first row;
    their difference is the window sum (meaningless for empty windows).  Both are arrays
    of the caller's own but the first may be ``prefix`` itself."""
    if b.aligned and s.n:
        # Before a non-empty window's first row lo: the prefix at lo - 1, or 0 where lo starts the
        # subject (aligned windows lie in their row's subject; empty ones are the caller's business).
        bottom = np.subtract(b.lo, 1)
        np.maximum(bottom, 0, out=bottom)
        np.take(prefix, bottom, out=bottom.view(np.float64), mode="clip")  # in place: no second array
        bottom = bottom.view(np.float64)
        bottom[b.lo == s.first] = 0.0
        if b.end == 0:  # hi - 1 = i: the prefix itself
            return prefix, bottom
        return prefix[np.maximum(b.hi - 1, 0)], bottom
    before = np.empty_like(prefix)  # sum of the subject's rows before row j, exactly 0 at starts
    if s.n:
        before[1:] = prefix[:-1]
        before[s.starts] = 0.0
    if b.aligned and b.end == 0:  # hi - 1 = i: the prefix itself
        return prefix, before[b.lo]
    return prefix[np.maximum(b.hi - 1, 0)], before[b.lo]


def _rounding(s: Subjects, b: Bounds, magnitude_top: np.ndarray | None, v: np.ndarray) -> np.ndarray:
    """Per row: a bound on the rounding error of a window sum taken from prefix sums.

    A sequential prefix sum over k values errs by at most (k - 1) eps times the sum of
    their magnitudes; a window's sum is the difference of two such prefixes of its own
    subject, the longer one at the window's end.  ``magnitude_top`` is that running sum of
    |v| at the window's end when already at hand.  Depends on the row's subject only.
    """
    if magnitude_top is None:
        run = K.cumsum(s, np.abs(v))
        magnitude_top = run[np.maximum(b.hi - 1, 0)]
    last = s.pos if b.aligned and b.end == 0 else s.pos[np.maximum(b.hi - 1, 0)]
    k = np.add(last, 2, dtype=np.float64) if s.n else np.zeros(0)  # exact: positions are far below 2**53
    k *= 2 * _EPS
    k *= magnitude_top
    return k


def _sum_of_rows(vals: np.ndarray, c: np.ndarray) -> np.ndarray:
    with np.errstate(over="ignore", invalid="ignore"):
        out = np.nansum(vals, axis=1)
    over = ~np.isfinite(out)
    if over.any():  # an intermediate sum passed the float64 maximum: add scaled down, scale back
        with np.errstate(over="ignore"):
            out[over] = np.nansum(vals[over] * _SCALE_DOWN, axis=1) * _SCALE_UP
    return out


def _direct(b: Bounds, v: np.ndarray, ufunc: np.ufunc, start: float | int,
            depth: int | None = None, beyond: np.ndarray | None = None) -> np.ndarray:
    """Reduce each (short) window offset by offset: ``ufunc`` over v[hi - 1 - d], d < length.

    ``depth``: only the offsets d < depth; windows longer than that take ``beyond`` (their
    result from another path; overwritten with the result where the ends are regular) or,
    without it, a partial reduction for the caller to replace.
    """
    n = v.size
    dtype = np.result_type(v.dtype, type(start))
    reach_max = b.width if depth is None else min(b.width, depth)
    if b.end < 0:  # irregular ends: gather each offset
        out = np.full(n, start, dtype=dtype)
        for d in range(reach_max):
            reach = b.length > d
            ufunc(out, v[np.maximum(b.hi - 1 - d, 0)], out=out, where=reach)
        if beyond is not None:
            np.copyto(out, beyond, where=b.length > reach_max)
        return out
    # Row i's window ends at v[i - end]: the running reductions over the last 1, 2, ... rows
    # are shifted slices of each other.  A block of rows keeps them all (row 0: the empty
    # window), and each row picks the one of its own length by one gather: plain vectorised
    # passes, not masked ones (a ufunc with a data-dependent where= runs about twenty times
    # slower).  Blocks of _BLOCK rows keep that matrix in the cache.
    # each block of beyond is copied into the grid before the block's results are written
    out = np.empty(n, dtype=dtype) if beyond is None else beyond
    top = reach_max + (beyond is not None)
    step = min(_BLOCK, max(n, 1))
    grid = np.empty((top + 1, step), dtype=dtype)
    grid[0] = start
    flat = grid.reshape(-1)
    cols = np.arange(step)
    for a in range(0, n, step):
        z = min(a + step, n)
        m = z - a
        for d in range(reach_max):
            s = b.end + d
            k = min(max(s - a, 0), m)  # rows before k reach before row 0: never picked at this depth
            ufunc(grid[d, k:m], v[a + k - s: z - s], out=grid[d + 1, k:m])
        if beyond is not None:
            grid[top, :m] = beyond[a:z]
        pick = np.minimum(b.length[a:z], top)
        pick *= step
        pick += cols[:m]
        np.take(flat, pick, out=out[a:z])
    return out


#: Rows per block of :func:`_direct` (a few matrices of this many values stay in the cache).
_BLOCK = 1 << 15


# ---------------------------------------------------------------------- var, std
def variance(s: Subjects, b: Bounds, y: np.ndarray, valid: np.ndarray, cnt: np.ndarray) -> np.ndarray:
    """Sample variance of the non-missing values of each window; NaN below two values.

    ``y`` must be finite where ``valid`` (infinities are the caller's business).
    """
    out = np.full(s.n, np.nan)
    enough = cnt >= 2
    if b.width <= DIRECT_MAX:
        rows = np.flatnonzero(enough)
        out[rows] = padded_apply(y, b, rows, _two_pass_var)
        return out
    # Short windows always take the two-pass route (see total): a row never depends on others.
    short = enough & (b.length <= DIRECT_MAX)
    enough = enough & ~short
    rows = np.flatnonzero(short)
    if rows.size:
        out[rows] = padded_apply(y, b, rows, _two_pass_var)
    # Centre by the subject mean so that prefix sums of squares stay of the window's size.
    n_valid = s.reduce(np.add, valid.astype(np.float64))
    v0 = np.where(valid, y, 0.0)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        centre = s.reduce(np.add, v0) / n_valid
        w = np.where(valid, y - np.where(n_valid > 0, centre, 0.0), 0.0)
        ww = w * w
        t1, b1 = _prefix_ends(s, b, K.cumsum(s, w))
        t2, b2 = _prefix_ends(s, b, K.cumsum(s, ww))
        s1 = np.where(b.length > 0, t1 - b1, 0.0)
        s2 = np.where(b.length > 0, t2 - b2, 0.0)
        safe_cnt = np.maximum(cnt, 1)
        num = s2 - s1 * s1 / safe_cnt
        # Rounding bound of num: of s2, and of s1 as it enters s1**2 / count (see _rounding).
        bound = 4 * (_rounding(s, b, None, ww) + _EPS * np.abs(s2)
                     + 2 * np.abs(s1) * _rounding(s, b, None, w) / safe_cnt)
        out = np.where(enough, np.maximum(num, 0.0) / (cnt - 1), out)
        # not finite: an overflow on the way (the two-pass sums below scale if they must)
        redo = np.flatnonzero(enough & ((bound > VAR_RTOL * num) | ~np.isfinite(num) | ~np.isfinite(bound)))
    if redo.size:
        out[redo] = padded_apply(y, b, redo, _two_pass_var)
    return out


def _two_pass_var(vals: np.ndarray, c: np.ndarray) -> np.ndarray:
    # Corrected two-pass formula: the second term removes the rounding error of the mean.
    # Values near the float64 maximum are scaled down first (by a power of two, exactly),
    # so the mean and squares do not overflow where the variance itself does not.
    top = np.nanmax(np.abs(vals), axis=1)
    exp = np.where(top > 2.0**500, np.frexp(top)[1], 0)  # rows near the limit: largest value below 1
    v = np.ldexp(vals, -exp[:, None])
    mean = np.nansum(v, axis=1) / c
    dev = v - mean[:, None]
    var = np.maximum(np.nansum(dev * dev, axis=1) - np.nansum(dev, axis=1) ** 2 / c, 0.0) / (c - 1)
    with np.errstate(over="ignore"):
        return np.ldexp(var, 2 * exp)  # inf where the variance itself is beyond float64


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
        # the width is fixed by the length class, not by the rows present: a row's padded
        # sums then never depend on the other rows (pairwise summation follows the width)
        width = 1 << int(bucket[group[0]])
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
