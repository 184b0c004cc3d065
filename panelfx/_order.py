"""Ordering: rows by (subject, time), every sort strategy behind one function.

What transforms may use: nothing directly.  The engine calls :func:`order_rows` once per
panel and keeps the :class:`Ordering` it returns, which sorts arrays (caller order to
(subject, time) order) and unsorts them (back), once per output in ``derive``.

Subjects are numbered in order of first appearance, so a subject's sorted rows come in
the same place whatever path made the order.  The strategies, fastest first:

- ``"identity"``: the rows already come grouped by subject and in time order (an O(n)
  check); nothing is sorted or scattered.
- ``"by_value"``: one integer id column: rows sorted by (id value, time, row) without
  factorising the ids, then whole subjects put back in first-appearance order.
- ``"packed"``: subject code, time key and row number packed into one int64 and sorted in
  place (about five times faster than ``np.lexsort``; the row number keeps ties stable).
- ``"ranked"``: as packed, with times replaced by their dense ranks when the raw time key
  needs too many bits.
- ``"lexsort"``: ``np.lexsort`` on (time key, subject code), when even ranks do not fit.

Every strategy gives the same permutation; :func:`forced` makes a test use one.
"""

from __future__ import annotations

import contextlib
from collections.abc import Callable, Iterator, Sequence
from contextvars import ContextVar
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ._threads import WORKERS, run_all
from .errors import NullKeyError, rows_message

STRATEGIES = ("identity", "by_value", "packed", "ranked", "lexsort")
#: With several threads, packed keys of at least this many rows are sorted in two halves side
#: by side, then merged (tests lower it to force that path).
PARALLEL_SORT_MIN = 1 << 20
_FORCED: ContextVar[str | None] = ContextVar("panelfx_forced_order", default=None)


@contextlib.contextmanager
def forced(strategy: str) -> Iterator[None]:
    """Make :func:`order_rows` use ``strategy`` wherever it applies (tests only)."""
    if strategy not in STRATEGIES:
        raise ValueError(f"strategy must be one of {STRATEGIES}, got {strategy!r}")
    token = _FORCED.set(strategy)
    try:
        yield
    finally:
        _FORCED.reset(token)


@dataclass(frozen=True, eq=False)
class Ordering:
    """A permutation of rows: ``order[k]`` is the caller position of sorted row k (``None``: identity)."""

    order: np.ndarray | None
    strategy: str

    def sort(self, values: np.ndarray) -> np.ndarray:
        """Caller order -> sorted order."""
        return values if self.order is None else values[self.order]

    def unsort(self, values: np.ndarray) -> np.ndarray:
        """Sorted order -> caller order."""
        if self.order is None:
            return values
        out = np.empty_like(values)
        out[self.order] = values
        return out

    def positions(self, sorted_positions: np.ndarray) -> np.ndarray:
        """Caller positions of sorted rows."""
        return sorted_positions if self.order is None else self.order[sorted_positions]


def subject_codes(frame: pd.DataFrame, id_cols: Sequence[str]) -> np.ndarray:
    """int64 subject codes numbered in order of first appearance; composite ids of any number
    of parts never merge (codes are re-numbered after each part, so they stay below n)."""
    check_null_ids(frame, id_cols)
    codes: np.ndarray | None = None
    for c in id_cols:
        k, uniq = pd.factorize(frame[c], sort=False)
        k = k.astype(np.int64, copy=False)
        if codes is None:
            codes = k
        else:
            codes, _ = pd.factorize(codes * (len(uniq) + 1) + k, sort=False)
            codes = codes.astype(np.int64, copy=False)
    assert codes is not None
    return codes


def check_null_ids(frame: pd.DataFrame, id_cols: Sequence[str]) -> None:
    nulls = np.zeros(len(frame), dtype=bool)
    for c in id_cols:
        nulls |= frame[c].isna().to_numpy()
    if nulls.any():
        bad = list(frame.index[nulls])
        label = id_cols[0] if len(id_cols) == 1 else str(list(id_cols))
        raise NullKeyError(rows_message("missing subject id", label, len(bad), bad, noun="row labels"),
                           column=id_cols[0], count=len(bad), ids=bad)


def order_rows(frame: pd.DataFrame, id_cols: Sequence[str], t: np.ndarray,
               key: Callable[[], np.ndarray]) -> tuple[Ordering, np.ndarray]:
    """(Ordering, subject codes in sorted order) for rows by (subject, time).

    ``t`` are the native times (only compared with each other) and ``key()`` returns an
    int64 array that sorts like them (called only when a sort is needed).  Ties in time
    keep their row order: they are duplicates, which the caller reports or accepts.
    """
    n = len(frame)
    force = _FORCED.get()
    ids = _integer_ids(frame, id_cols) if force not in ("packed", "ranked", "lexsort") else None
    if ids is not None:
        made = _by_value(ids, t, key, force)
        if made is not None:
            return made
    codes = subject_codes(frame, id_cols)
    if n < 2:
        return Ordering(None, "identity"), codes
    if force in (None, "identity") and _in_order(codes, t):
        return Ordering(None, "identity"), codes
    return _sort(codes, key(), force)


def _in_order(codes: np.ndarray, t: np.ndarray) -> bool:
    """Each subject's rows contiguous (first-appearance codes non-decreasing) and in time order."""
    if (codes[1:] < codes[:-1]).any():
        return False
    back = t[1:] < t[:-1]
    back &= codes[1:] == codes[:-1]
    return not back.any()


def _sort(codes: np.ndarray, tkey: np.ndarray, force: str | None) -> tuple[Ordering, np.ndarray]:
    """Stable sort by (code, time key): packed, ranked or lexsort, the first whose key fits."""
    n = len(codes)
    code_bits = int(codes.max()).bit_length()
    row_bits = (n - 1).bit_length()
    if force != "lexsort":
        lo = int(tkey.min())
        span_bits = (int(tkey.max()) - lo).bit_length()
        if force != "ranked" and code_bits + span_bits + row_bits <= 63:
            return _packed(codes, tkey - lo, span_bits, row_bits, "packed")
        ranks, bound = dense_ranks(tkey)
        rank_bits = (bound - 1).bit_length()
        if code_bits + rank_bits + row_bits <= 63:
            return _packed(codes, ranks, rank_bits, row_bits, "ranked")
    order = np.lexsort((tkey, codes))
    return Ordering(order, "lexsort"), codes[order]


def _packed(codes: np.ndarray, q: np.ndarray, time_bits: int, row_bits: int,
            strategy: str) -> tuple[Ordering, np.ndarray]:
    """One int64 per row: code, then time (non-negative, < 2**time_bits), then row number."""
    key = codes << time_bits
    key |= q
    key <<= row_bits
    key |= np.arange(len(codes))
    sort_unique(key)
    order = key & ((1 << row_bits) - 1)
    key >>= time_bits + row_bits
    return Ordering(order, strategy), key


def sort_unique(key: np.ndarray) -> None:
    """Sort int64 values that are all distinct, in place; on two threads for large arrays: each
    half sorted side by side, then one merge of the two sorted runs (a stable sort finds them).
    Distinct values have one sorted order, so the result does not depend on the path."""
    n = len(key)
    if WORKERS.get() > 1 and n >= PARALLEL_SORT_MIN:
        half = n // 2
        run_all([key[:half].sort, key[half:].sort])
        key.sort(kind="stable")
    else:
        key.sort()


def dense_ranks(t: np.ndarray) -> tuple[np.ndarray, int]:
    """0, 1, 2, ... for the distinct values in increasing order, and their number."""
    uniq, ranks = np.unique(t, return_inverse=True)
    return ranks.astype(np.int64, copy=False).reshape(-1), max(len(uniq), 1)


def _integer_ids(frame: pd.DataFrame, id_cols: Sequence[str]) -> np.ndarray | None:
    """One id column of numpy integers, as int64 offsets from the smallest id, when they fit
    the packed sort beside the row number; ``None`` otherwise (then ids are factorised)."""
    if len(id_cols) != 1 or len(frame) < 2:
        return None
    s = frame[id_cols[0]]
    if not isinstance(s.dtype, np.dtype) or s.dtype.kind not in "iu":
        return None
    ids = s.to_numpy()
    lo, hi = int(ids.min()), int(ids.max())
    if (hi - lo).bit_length() + (len(ids) - 1).bit_length() > 62:
        return None
    if ids.dtype == np.uint64:  # may exceed int64: subtract in its own type (no wrap: lo <= ids)
        return (ids - np.uint64(lo)).astype(np.int64)
    out = ids.astype(np.int64)  # small types would wrap when the offset is taken in them
    out -= lo
    return out


def _by_value(ids: np.ndarray, t: np.ndarray, key: Callable[[], np.ndarray],
              force: str | None) -> tuple[Ordering, np.ndarray] | None:
    """:func:`order_rows` for integer ids without factorising them: the same permutation.

    Rows are sorted by (id value, time, row); then the subjects are put back in order of
    first appearance, as factorised codes number them (one permutation of whole subjects,
    skipped when ids already appear in increasing order).  ``None`` when the packed key
    does not fit (the caller then factorises).
    """
    n = len(ids)
    same = ids[1:] == ids[:-1]
    back = t[1:] < t[:-1]
    back &= same
    times_in_order = not back.any()
    del back
    if force in (None, "identity") and times_in_order and not (ids[1:] < ids[:-1]).any():
        return Ordering(None, "identity"), ids
    runs = n - int(np.count_nonzero(same))
    del same
    tkey = key()
    lo = int(tkey.min())
    span_bits = (int(tkey.max()) - lo).bit_length()
    if int(ids.max()).bit_length() + span_bits + (n - 1).bit_length() > 63:
        return None
    ordering, sorted_ids = _packed(ids, tkey - lo, span_bits, (n - 1).bit_length(), "by_value")
    order = ordering.order
    assert order is not None
    starts = np.flatnonzero(np.concatenate(([True], sorted_ids[1:] != sorted_ids[:-1])))
    if force is None and times_in_order and runs == len(starts):
        return Ordering(None, "identity"), ids  # each subject's rows were contiguous and in order already
    sizes = np.diff(np.append(starts, n))
    first_seen = np.minimum.reduceat(order, starts)
    if (first_seen[1:] < first_seen[:-1]).any():
        by_first = np.argsort(first_seen)
        new_sizes = sizes[by_first]
        new_starts = np.cumsum(new_sizes) - new_sizes
        rows = np.repeat(starts[by_first] - new_starts, new_sizes)
        rows += np.arange(n)
        order = order[rows]
        sizes = new_sizes
    return Ordering(order, "by_value"), np.repeat(np.arange(len(starts), dtype=np.int64), sizes)
