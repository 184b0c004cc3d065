"""The running-sum kernel: bit for bit a per-subject sequential sum, whatever came before."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from panelfx import _kernels as K
from panelfx._subjects import SCAN_SHORT, Subjects


def subjects_of(sizes: list[int]) -> Subjects:
    return Subjects.from_codes(np.repeat(np.arange(len(sizes)), sizes))


def per_subject_loop(s: Subjects, v: np.ndarray) -> np.ndarray:
    """Plain Python: add one subject's values one by one from 0.0 (the definition; no shared code)."""
    out = np.empty_like(v)
    for a, b in zip(s.starts, s.ends):
        total = 0.0
        for k in range(a, b):
            total += float(v[k])
            out[k] = total
    return out


def per_subject_fsum(s: Subjects, v: np.ndarray) -> np.ndarray:
    """Exactly rounded running sums, one subject at a time (math.fsum: outside reference)."""
    out = np.empty_like(v)
    for a, b in zip(s.starts, s.ends):
        out[a:b] = [math.fsum(v[a:k + 1]) for k in range(a, b)]
    return out


def relative_error(got: np.ndarray, want: np.ndarray) -> float:
    scale = np.maximum(np.abs(want), np.finfo(float).tiny)
    return float(np.max(np.abs(got - want) / scale))


def test_small_subjects_after_huge_ones_keep_their_digits():
    """A global cumulative sum minus offsets loses every digit of a 1e-12 subject after 1e12 ones."""
    rng = np.random.default_rng(5)
    s = subjects_of(list(rng.integers(1, 15, 400)))
    scale = np.where(s.grp % 2 == 0, 1e12, 1e-12)
    v = rng.random(s.n) * scale
    naive = np.cumsum(v) - (np.cumsum(v)[s.starts] - v[s.starts])[s.grp]
    want = per_subject_fsum(s, v)
    assert relative_error(naive, want) > 1e-3  # the failure this kernel exists to avoid
    assert relative_error(K.cumsum(s, v), want) < 1e-13


def test_long_panel_of_ordinary_doses():
    rng = np.random.default_rng(6)
    s = subjects_of(list(rng.poisson(10, 20_000) + 1))
    v = np.round(rng.random(s.n) * 50, 1) * (rng.random(s.n) > 0.2)
    sample = np.flatnonzero(s.grp % 50 == 0)
    assert relative_error(K.cumsum(s, v)[sample], per_subject_fsum(s, v)[sample]) < 1e-13
    assert np.array_equal(K.cumsum(s, v), per_subject_loop(s, v))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.floats(-1e15, 1e15, allow_nan=False, allow_infinity=False), min_size=1, max_size=40),
                min_size=1, max_size=12))
def test_is_the_sequential_per_subject_sum(subjects):
    s = subjects_of([len(x) for x in subjects])
    v = np.array([x for sub in subjects for x in sub])
    got = K.cumsum(s, v)
    assert np.array_equal(got, per_subject_loop(s, v))
    # and close to the exactly rounded sum, on the subject's own scale
    scale = np.add.reduceat(np.abs(v), s.starts)[s.grp] + np.finfo(float).tiny
    assert np.all(np.abs(got - per_subject_fsum(s, v)) <= 64 * np.finfo(float).eps * scale)


def test_every_length_class_and_any_neighbours():
    """Subjects of 1 to 300 rows (each length class of the kernel's matrices) give the same sums
    alone as among others."""
    rng = np.random.default_rng(7)
    sizes = [1, 2, 3, 4, 5, 8, 9, 16, 17, 31, 64, 65, 300, 1, 7]
    s = subjects_of(sizes)
    v = rng.normal(size=s.n) * 10.0 ** rng.integers(-8, 8, s.n)
    got = K.cumsum(s, v)
    assert np.array_equal(got, per_subject_loop(s, v))
    for a, b in zip(s.starts, s.ends):
        alone = K.cumsum(subjects_of([b - a]), v[a:b])
        assert np.array_equal(alone, got[a:b])


def test_infinite_values_stay_within_their_subject():
    s = subjects_of([2, 2])
    v = np.array([1.0, np.inf, 2.0, 3.0])
    assert K.cumsum(s, v).tolist() == [1.0, np.inf, 2.0, 5.0]


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_overflow_on_the_way_is_not_kept(sign):
    """1e308 + 1e308 overflows; adding -1e308 brings the true sum back to 1e308 (hand computed)."""
    s = subjects_of([4, 2])
    v = sign * np.array([1e308, 1e308, -1e308, 1.0, 5.0, 6.0])
    got = K.cumsum(s, v)
    assert got.tolist() == (sign * np.array([1e308, np.inf, 1e308, 1e308, 5.0, 11.0])).tolist()


@pytest.mark.parametrize("sizes", [
    [SCAN_SHORT, SCAN_SHORT + 1, 1, 2 * SCAN_SHORT + 1, SCAN_SHORT - 1, 3],  # both layouts, around the cut
    [SCAN_SHORT + 1, 4 * SCAN_SHORT],  # long subjects only
    [1, 1, 1],  # nothing to add
])
def test_both_layouts_are_the_sequential_sum(sizes):
    """Short subjects are summed position by position, long ones along matrix rows: each alone."""
    rng = np.random.default_rng(8)
    s = subjects_of(sizes)
    v = rng.normal(size=s.n) * 10.0 ** rng.integers(-8, 8, s.n)
    assert np.array_equal(K.cumsum(s, v), per_subject_loop(s, v))


def test_layout_is_made_once_per_boundaries():
    s = subjects_of([3, 70, 1])
    first = s.scan
    K.cumsum(s, np.ones(s.n))
    assert s.scan is first
    assert sorted(first.index.tolist()) == sorted(set(first.index.tolist()))  # one cell per row
