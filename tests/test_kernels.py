"""The running-sum kernel is as accurate as a per-subject sum, whatever came before."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from panelfx import _kernels as K
from panelfx._panel import Panel


def panel_of(sizes: list[int]) -> Panel:
    sub = np.repeat(np.arange(len(sizes)), sizes)
    t = np.concatenate([np.arange(s) for s in sizes]).astype(float)
    return Panel(pd.DataFrame({"id": sub, "t": t}), id="id", time="t")


def per_subject_fsum(p: Panel, v: np.ndarray) -> np.ndarray:
    """Exactly rounded running sums, one subject at a time (math.fsum: outside reference)."""
    out = np.empty_like(v)
    for a, b in zip(p.starts, p.ends):
        out[a:b] = [math.fsum(v[a:k + 1]) for k in range(a, b)]
    return out


def relative_error(got: np.ndarray, want: np.ndarray) -> float:
    scale = np.maximum(np.abs(want), np.finfo(float).tiny)
    return float(np.max(np.abs(got - want) / scale))


def test_small_subjects_after_huge_ones_keep_their_digits():
    """A global cumulative sum minus offsets loses every digit of a 1e-12 subject after 1e12 ones."""
    rng = np.random.default_rng(5)
    sizes = list(rng.integers(1, 15, 400))
    p = panel_of(sizes)
    scale = np.where(p.grp % 2 == 0, 1e12, 1e-12)
    v = rng.random(p.n) * scale
    naive = np.cumsum(v) - (np.cumsum(v)[p.starts] - v[p.starts])[p.grp]
    want = per_subject_fsum(p, v)
    assert relative_error(naive, want) > 1e-3  # the failure this kernel exists to avoid
    assert relative_error(K.cumsum(p, v), want) < 1e-13


def test_long_panel_of_ordinary_doses():
    rng = np.random.default_rng(6)
    p = panel_of(list(rng.poisson(10, 20_000) + 1))
    v = np.round(rng.random(p.n) * 50, 1) * (rng.random(p.n) > 0.2)
    sample = np.flatnonzero(p.grp % 50 == 0)
    want = per_subject_fsum(p, v)[sample]
    assert relative_error(K.cumsum(p, v)[sample], want) < 1e-13


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.floats(-1e15, 1e15, allow_nan=False, allow_infinity=False), min_size=1, max_size=20),
                min_size=1, max_size=12))
def test_matches_per_subject_sums(subjects):
    p = panel_of([len(s) for s in subjects])
    v = np.array([x for s in subjects for x in s])
    want = per_subject_fsum(p, v)
    got = K.cumsum(p, v)
    # Sequential summation inside a subject may itself cancel: compare on the subject's own scale.
    scale = np.add.reduceat(np.abs(v), p.starts)[p.grp] + np.finfo(float).tiny
    assert np.all(np.abs(got - want) <= 64 * np.finfo(float).eps * scale)


@pytest.mark.parametrize("rows", ["all", "some"])
def test_segment_scan_is_a_per_subject_running_sum(rows):
    p = panel_of([1, 5, 3, 17, 2])
    v = np.arange(p.n, dtype=float) + 0.5
    sel = np.arange(p.n) if rows == "all" else np.flatnonzero(np.isin(p.grp, [1, 3]))
    assert np.allclose(K.segment_scan(p, v, sel), per_subject_fsum(p, v)[sel], rtol=1e-15)


def test_infinite_values_stay_within_their_subject():
    p = panel_of([2, 2])
    v = np.array([1.0, np.inf, 2.0, 3.0])
    assert K.cumsum(p, v).tolist() == [1.0, np.inf, 2.0, 5.0]
