"""Subject boundaries over rows in (subject, time) order: a frozen value.

What transforms may use: ``n`` rows, ``starts`` / ``ends`` (first and one-past-last row of
each subject), ``grp`` (subject number of each row), and, made on first use, ``pos``
(position within the subject, 0, 1, ...), ``size`` (the subject's number of rows, per row)
and ``first`` (the subject's first row, per row).  :meth:`Subjects.split` cuts subjects into
runs of consecutive rows (exposure restarted after a long gap, say) and returns the same
kind of value, so every kernel works per run as it works per subject.

:attr:`Subjects.scan` is the cell layout of the per-subject running sums
(:func:`panelfx._kernels.cumsum`); it depends only on the boundaries, so it is made once per
value and shared by every running sum over the same subjects.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

#: Subjects of at most this many rows are summed position by position (see :class:`ScanLayout`);
#: below 255, since their order is found by a one-byte sort.
SCAN_SHORT = 64


@dataclass(frozen=True, eq=False)
class ScanLayout:
    """Where :func:`panelfx._kernels.cumsum` puts each row so that one vectorised add serves many subjects.

    Subjects of at most :data:`SCAN_SHORT` rows, ordered longest first, are stored position-major
    without padding: all first rows, then all second rows (of the subjects that have one), and so
    on, so position p of every subject is one contiguous run, whose running sums are that run plus
    the run of position p - 1 (one add per position, at most :data:`SCAN_SHORT`).  Longer subjects
    follow as rows of padded matrices, one per length class (2**(k-1) < length <= 2**k; padding at
    most doubles their cells), summed along the rows.  Either way each subject is added in its own
    time order, alone.
    """

    index: np.ndarray  # cell of each row
    cells: int  # size of the buffer
    steps: tuple[tuple[int, int, int], ...]  # (cell of the previous position, cell of this one, subjects)
    blocks: tuple[tuple[int, int, int], ...]  # (first cell, subjects, cells per subject) of each long class


@dataclass(frozen=True, eq=False)
class Subjects:
    """Boundaries of consecutive groups of rows (subjects, or runs within subjects)."""

    n: int
    starts: np.ndarray
    ends: np.ndarray
    grp: np.ndarray

    @classmethod
    def from_starts(cls, is_start: np.ndarray) -> Subjects:
        """From a mask that is true on the first row of every group (row 0 must be one)."""
        n = len(is_start)
        starts = np.flatnonzero(is_start)
        ends = np.empty_like(starts)
        ends[:-1] = starts[1:]
        if len(ends):
            ends[-1] = n
        grp = np.cumsum(is_start, dtype=np.int64)
        grp -= 1
        return cls(n=n, starts=starts, ends=ends, grp=grp)

    @classmethod
    def from_codes(cls, codes: np.ndarray) -> Subjects:
        """From sorted group codes: a new group wherever the code changes."""
        is_start = np.empty(len(codes), dtype=bool)
        if len(codes):
            is_start[0] = True
            np.not_equal(codes[1:], codes[:-1], out=is_start[1:])
        return cls.from_starts(is_start)

    @property
    def count(self) -> int:
        """Number of groups."""
        return len(self.starts)

    @functools.cached_property
    def pos(self) -> np.ndarray:
        """Position of each row within its group (0, 1, ...)."""
        return np.arange(self.n) - self.first

    @functools.cached_property
    def first(self) -> np.ndarray:
        """The group's first row, on every row."""
        return self.starts[self.grp]

    @functools.cached_property
    def lengths(self) -> np.ndarray:
        """Rows per group (one entry per group)."""
        return self.ends - self.starts

    @functools.cached_property
    def size(self) -> np.ndarray:
        """The group's number of rows, on every row."""
        return self.lengths[self.grp]

    @functools.cached_property
    def scan(self) -> ScanLayout:
        """The running-sum layout of these boundaries (made on first use, then shared)."""
        return _scan_layout(self)

    def split(self, breaks: np.ndarray) -> Subjects:
        """Runs of consecutive rows: a new run at every group start and wherever ``breaks`` holds."""
        is_start = breaks.copy()
        is_start[self.starts] = True
        return Subjects.from_starts(is_start)

    def reduce(self, ufunc: np.ufunc, values: np.ndarray) -> np.ndarray:
        """Per-group reduction (e.g. ``np.add``) broadcast back to every row."""
        if self.n == 0:
            return values
        return ufunc.reduceat(values, self.starts)[self.grp]


def _scan_layout(s: Subjects) -> ScanLayout:
    lengths = s.lengths
    short = lengths <= SCAN_SHORT
    # Short subjects longest first (a stable radix sort on one byte), the long ones after them.
    rank_key = np.where(short, SCAN_SHORT - lengths, 255).astype(np.uint8)
    by_length = np.argsort(rank_key, kind="stable")
    n_short = int(np.count_nonzero(short))
    rank = np.empty(len(lengths), dtype=np.int64)
    rank[by_length] = np.arange(len(lengths))
    # reach[p]: short subjects with a row at position p; at[p]: the cell of position p of the first one
    reach = np.cumsum(np.bincount(lengths[short], minlength=SCAN_SHORT + 1)[::-1])[::-1][1:]
    reach = reach[reach > 0]
    at = np.zeros(len(reach) + 1, dtype=np.int64)
    np.cumsum(reach, out=at[1:])
    steps = tuple((int(at[p - 1]), int(at[p]), int(reach[p])) for p in range(1, len(reach)))
    cells = int(at[-1])
    blocks: list[tuple[int, int, int]] = []
    if n_short == len(lengths):
        index = at[s.pos]
        index += rank[s.grp]
        return ScanLayout(index, cells, steps, ())
    # Long subjects: per subject the cell of its first row; the rows follow it.
    first_cell = rank.copy()  # short ones: rank + at[pos], below
    longs = by_length[n_short:]
    cls = np.frexp(lengths[longs] - 1)[1]  # ceil(log2(length)); 0 for one row
    for k in np.unique(cls).tolist():
        members = longs[cls == k]  # in subject order
        first_cell[members] = cells + (np.arange(len(members), dtype=np.int64) << k)
        blocks.append((cells, len(members), 1 << k))
        cells += len(members) << k
    index = first_cell[s.grp]
    if n_short:
        index += np.where(short[s.grp], at[np.minimum(s.pos, len(at) - 1)], s.pos)
    else:
        index += s.pos
    return ScanLayout(index, cells, steps, tuple(blocks))
