"""Vectorised kernels over sorted rows and subject boundaries.

Every function takes arrays in (subject, time) order and the :class:`~panelfx._subjects.Subjects`
that holds the boundaries (or runs within subjects).  Index results use -1 for "no such
row".  No function loops in Python over subjects or rows; the loops here run over length
classes of subjects (about log2 of the longest one).

Every result of a row depends only on its own subject's rows: never on the other subjects
or on where the subject sits among them, so results are bit-identical whatever the input
row order.
"""

from __future__ import annotations

from contextvars import ContextVar
from dataclasses import dataclass

import numpy as np

from ._subjects import Subjects

#: Powers of two used to carry running sums whose float64 value overflows (see :func:`cumsum`).
_SCALE_DOWN = 2.0**-80
_SCALE_UP = 2.0**80

SEARCH_PATHS = ("offset", "rank", "packed", "merge", "searchsorted")
#: Tests force a search path (key "offset" or "rank"; lookup "packed", "merge" or "searchsorted").
FORCED_SEARCH: ContextVar[tuple[str, ...]] = ContextVar("panelfx_forced_search", default=())


def take(values: np.ndarray, index: np.ndarray, fill: float = np.nan) -> np.ndarray:
    """``values[index]`` as float64 with ``fill`` where index is -1."""
    out = values[np.maximum(index, 0)]
    if out.dtype.kind != "f":
        out = out.astype("float64")
    out[index < 0] = fill
    return out


def shift_index(s: Subjects, periods: int) -> np.ndarray:
    """Row ``periods`` occasions earlier in the same subject (later when negative), else -1."""
    idx = np.arange(s.n) - periods
    if periods in (1, -1) and s.n:
        # The usual one-step shift needs only the subject boundaries, not pos and size.
        idx[s.starts if periods == 1 else s.ends - 1] = -1
        return idx
    ok = s.pos >= periods if periods >= 0 else s.pos - periods < s.size
    return np.where(ok, idx, -1)


def at_previous(s: Subjects, index: np.ndarray) -> np.ndarray:
    """Per row: ``index`` as it stood at the subject's previous occasion (-1 on its first)."""
    prev = shift_index(s, 1)
    return np.where(prev >= 0, index[np.maximum(prev, 0)], -1)


def first_index(s: Subjects, mask: np.ndarray) -> np.ndarray:
    """Per row: the subject's first row where ``mask`` holds, else -1."""
    if s.n == 0:
        return np.empty(0, dtype=np.int64)
    cand = np.where(mask, np.arange(s.n), s.n)
    first = np.minimum.reduceat(cand, s.starts)
    return np.where(first < s.n, first, -1)[s.grp]


def last_index_upto(s: Subjects, mask: np.ndarray) -> np.ndarray:
    """Per row: the latest row at or before it, in the same subject, where ``mask`` holds, else -1."""
    cand = np.where(mask, np.arange(s.n), -1)
    last = np.maximum.accumulate(cand) if s.n else cand
    return np.where(last >= s.first, last, -1)


def last_index_in_subject(s: Subjects, mask: np.ndarray) -> np.ndarray:
    """Per row: the subject's last row where ``mask`` holds, else -1."""
    if s.n == 0:
        return np.empty(0, dtype=np.int64)
    cand = np.where(mask, np.arange(s.n), -1)
    return np.maximum.reduceat(cand, s.starts)[s.grp]


def running_count(s: Subjects, mask: np.ndarray) -> np.ndarray:
    """Per row: how many rows at or before it, in the same subject, satisfy ``mask`` (int64, exact)."""
    if s.n == 0:
        return np.zeros(0, dtype=np.int64)
    m = mask.astype(np.int64)
    c = np.cumsum(m)
    before = c[s.starts] - m[s.starts]
    return c - before[s.grp]


# ---------------------------------------------------------------------- running sums
def cumsum(s: Subjects, values: np.ndarray) -> np.ndarray:
    """Running sum within subject: bit for bit ``s = 0.0; s += v`` over the subject's rows in float64.

    Sequential addition in time order, exactly as a loop over one subject's rows would
    do it, so a subject's sums never depend on other subjects or on the row order.  The
    rows are laid out in a buffer (:attr:`Subjects.scan <panelfx._subjects.Subjects.scan>`,
    made once per set of boundaries) where one vectorised add extends the sums of many
    subjects by one position (short subjects) or one ``np.cumsum`` sums a matrix of long
    subjects along its rows.

    Overflow: where a running sum overflows float64 although every value added is finite,
    the subject's later sums are carried scaled by 2**-80 and scaled back, so a later sum
    that float64 can hold is returned (inf only where the sum itself is beyond it).
    """
    v = values.astype(np.float64, copy=False)
    with np.errstate(over="ignore", invalid="ignore"):  # IEEE results; overflow is mended below
        out = _grid_cumsum(s, v)
    if s.n and not np.isfinite(out).all():
        _rescue_overflow(s, v, out)
    out += 0.0  # a loop starts from +0.0: a sum of negative zeros is +0.0, as there
    return out


def _grid_cumsum(s: Subjects, v: np.ndarray) -> np.ndarray:
    if s.n == 0:
        return np.empty(0)
    lay = s.scan  # shared by every running sum over these subjects
    # Cells beyond a long subject's last row are never read back, and each subject's sums use
    # only its own earlier cells, so the buffer needs no zero fill.
    flat = np.empty(lay.cells)
    flat[lay.index] = v
    for prev, cur, width in lay.steps:  # one add per position of the short subjects
        np.add(flat[prev: prev + width], flat[cur: cur + width], out=flat[cur: cur + width])
    for first, rows, row_len in lay.blocks:  # long subjects: sequential sums along matrix rows
        block = flat[first: first + rows * row_len].reshape(rows, row_len)
        np.cumsum(block, axis=1, out=block)
    return flat[lay.index]


def _rescue_overflow(s: Subjects, v: np.ndarray, out: np.ndarray) -> None:
    """Recompute, scaled, the rows whose running sum overflowed while their values were finite."""
    bad_value = running_count(s, ~np.isfinite(v)) > 0
    overflow = ~np.isfinite(out) & ~bad_value
    if not overflow.any():
        return
    rows = np.flatnonzero(np.isin(s.grp, np.unique(s.grp[overflow])))
    sub = Subjects.from_codes(s.grp[rows])
    with np.errstate(over="ignore"):
        scaled = _grid_cumsum(sub, v[rows] * _SCALE_DOWN) * _SCALE_UP
    redo = overflow[rows]
    out[rows[redo]] = scaled[redo]


# ---------------------------------------------------------------------- searches within subjects
@dataclass(frozen=True, eq=False)
class SearchKey:
    """One int64 key that grows along the sorted rows: subject block, then time.

    ``mode`` "offset": block * width + (time key - the subject's first time key), when that
    fits in 62 bits; "rank": block * width + the dense rank of the time key among all rows
    (always fits).  Queries are mapped to the same scale by :func:`first_at_or_after`.
    """

    mode: str
    key: np.ndarray
    width: int
    distinct: np.ndarray | None  # rank mode: the distinct time keys, sorted
    first: np.ndarray | None = None  # offset mode: each subject's first time key


def search_key(s: Subjects, tkey: np.ndarray) -> SearchKey:
    """The search key of rows whose time key (int64, sorting like the times) is ``tkey``."""
    forced = FORCED_SEARCH.get()
    if s.n and "rank" not in forced:
        # offsets from the subject's first time, exact even past the int64 range (unsigned)
        urel = tkey.view(np.uint64) - tkey[s.first].view(np.uint64)
        width = int(urel.max()) + 2  # room for "after the subject's last time"
        if width.bit_length() + max(s.count, 1).bit_length() <= 62:
            rel = urel.view(np.int64)
            rel += s.grp * width
            return SearchKey("offset", rel, width, None, tkey[s.starts])
    distinct = np.unique(tkey)
    width = len(distinct) + 1
    key = np.searchsorted(distinct, tkey).astype(np.int64)
    key += s.grp * width
    return SearchKey("rank", key, width, distinct)


def first_at_or_after(s: Subjects, tkey: np.ndarray, sk: SearchKey, q: np.ndarray,
                      grp: np.ndarray | None = None, scratch: bool = False) -> np.ndarray:
    """Per query i in subject ``grp[i]`` (default: row i's own subject): the first row j of that
    subject with ``tkey[j] >= q[i]``, or the subject's end when there is none.  Exact: integer
    comparisons only.  ``scratch``: ``q`` is the caller's temporary and may be overwritten."""
    g = s.grp if grp is None else grp
    if len(q) == 0:
        return np.zeros(0, dtype=np.int64)
    if sk.mode == "offset":
        assert sk.first is not None
        first = sk.first[g]
        # q below the subject's first time: its first row; beyond first + width - 1: past its last
        # row, the subject's end (its keys stay below first + width - 1)
        rel = np.maximum(q, first, out=q if scratch else None)
        rel -= first
        np.minimum(rel.view(np.uint64), sk.width - 1, out=rel.view(np.uint64))  # q - first may pass int64
        block = np.multiply(g, sk.width, out=first)  # first is no longer needed: its memory serves
    else:
        assert sk.distinct is not None
        rel = np.searchsorted(sk.distinct, q, side="left").astype(np.int64)
        block = g * sk.width
    rel += block
    del block
    return _lookup(sk.key, rel)


def _lookup(key: np.ndarray, query: np.ndarray) -> np.ndarray:
    """First position of the sorted ``key`` >= each query (``np.searchsorted`` side left).

    When the queries are sorted too, one sort of the two sorted runs merges them in O(n),
    about three times faster than a binary search per query.  "packed": each value doubled,
    keys marked by the low bit, so that a key equal to a query sorts after it; a query's
    position minus the queries before it counts the keys below it.  Values are sorted, not
    positions (no index array; equal values are interchangeable, so stability does not
    matter).  "merge": the same with a stable argsort of queries-then-keys, for values that
    do not fit the packing (and for unsorted queries, when forced).
    """
    forced = FORCED_SEARCH.get()
    m = len(query)
    if m == 0:
        return np.zeros(0, dtype=np.int64)
    ordered = not (query[1:] < query[:-1]).any()
    if "searchsorted" in forced or not (ordered or "merge" in forced or "packed" in forced):
        return np.searchsorted(key, query, side="left")
    if ordered and "merge" not in forced and (not len(key) or (key[0] >= 0 and key[-1] < 2**62)) \
            and query[0] >= 0 and query[-1] < 2**62:
        both = np.empty(m + len(key), dtype=np.int64)
        np.left_shift(query, 1, out=both[:m])
        np.left_shift(key, 1, out=both[m:])
        both[m:] |= 1
        both.sort(kind="stable")  # two sorted runs: one merge
        np.bitwise_and(both, 1, out=both)
        is_query = both == 0
        np.cumsum(both, out=both)  # keys so far: at a query, the keys below it
        return both[is_query]
    order = np.argsort(np.concatenate([query, key]), kind="stable")
    at = np.flatnonzero(order < m)
    at -= np.arange(m)
    if ordered:
        return at
    out = np.empty(m, dtype=np.int64)
    out[order[order < m]] = at
    return out
