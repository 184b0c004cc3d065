"""Subject boundaries over rows in (subject, time) order: a frozen value.

What transforms may use: ``n`` rows, ``starts`` / ``ends`` (first and one-past-last row of
each subject), ``grp`` (subject number of each row), and, made on first use, ``pos``
(position within the subject, 0, 1, ...), ``size`` (the subject's number of rows, per row)
and ``first`` (the subject's first row, per row).  :meth:`Subjects.split` cuts subjects into
runs of consecutive rows (exposure restarted after a long gap, say) and returns the same
kind of value, so every kernel works per run as it works per subject.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np


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
