"""Exact (Garwood) Poisson confidence limits in numpy alone (scipy is not a runtime dependency).

For k observed events the exact two-sided 1 - alpha limits of the Poisson mean are the
gamma quantiles

    lower = G^-1(alpha / 2; k)          (0 when k = 0)
    upper = G^-1(1 - alpha / 2; k + 1)

where G(x; a) is the regularized lower incomplete gamma function; equivalently half the
chi-square quantiles with 2k and 2k + 2 degrees of freedom (the textbook formula).
G is computed by its power series (all terms at once, as arrays) and the quantile by
Newton steps kept inside a bracket that bisection narrows.  Loops run over iterations and
length classes, never over strata.
"""

from __future__ import annotations

import math
from statistics import NormalDist

import numpy as np

__all__ = ["poisson_limits", "gamma_p", "gamma_quantile"]

_EPS = 1e-16
_TINY = 1e-300
#: Newton stops when a step moves x by less than this share of it (the last step is then
#: below 1e-24 relative: quadratic convergence; rounding in P(a, x) limits the result to about 1e-13).
_XTOL = 1e-12
_HALF_LOG_2PI = 0.5 * math.log(2 * math.pi)


def lgamma(a: np.ndarray) -> np.ndarray:
    """log Gamma(a) for a > 0: Stirling's series from 10 on, shifted up by the recurrence below."""
    a = np.asarray(a, dtype=np.float64)
    shift = np.maximum(np.ceil(10.0 - a), 0.0)
    z = a + shift
    zi = 1.0 / z
    zi2 = zi * zi
    series = zi * (1 / 12 - zi2 * (1 / 360 - zi2 * (1 / 1260 - zi2 * (1 / 1680 - zi2 / 1188))))
    out = (z - 0.5) * np.log(z) - z + _HALF_LOG_2PI + series
    prod = np.ones_like(a)
    for k in range(int(shift.max(initial=0.0))):  # at most 10 steps: log Gamma(a) = log Gamma(a + n) - log a(a+1)...
        prod = np.where(k < shift, prod * (a + k), prod)
    return out - np.log(prod)


def _log_front(a: np.ndarray, x: np.ndarray) -> np.ndarray:
    """log(x**a * exp(-x) / Gamma(a)) for x > 0; for a >= 10 written around x = a (log1p), so that
    the large terms a log x, x and log Gamma(a) cancel without losing digits."""
    small = a < 10
    out = np.empty_like(a)
    if small.any():
        aa, xx = a[small], x[small]
        out[small] = aa * np.log(xx) - xx - lgamma(aa)
    big = ~small
    if big.any():
        aa, xx = a[big], x[big]
        d = (xx - aa) / aa
        zi = 1.0 / aa
        zi2 = zi * zi
        series = zi * (1 / 12 - zi2 * (1 / 360 - zi2 * (1 / 1260 - zi2 * (1 / 1680 - zi2 / 1188))))
        out[big] = aa * (np.log1p(d) - d) + 0.5 * np.log(aa) - _HALF_LOG_2PI - series
    return out


#: Most cells of one block of series terms (rows x terms), to bound memory.
_BLOCK = 1 << 21


def _log_series(a: np.ndarray, x: np.ndarray) -> np.ndarray:
    """log of sum_{n>=0} prod_{j=1..n} x / (a + j), to double precision.

    The terms rise until n is about x - a, then fall like a Gaussian of width about
    sqrt(x); about 9 widths past the peak they are below 1e-17 of the sum.  Terms are built
    as cumulative sums of log1p((a + j - x) / x) (small numbers, so the sums keep their
    digits) in blocks of subjects of similar length, and added up by log-sum-exp.
    """
    peak = np.maximum(x - a, 0.0)
    terms = np.ceil(peak + 9.0 * np.sqrt(x + peak + 1.0) + 25.0).astype(np.int64)
    cls = np.frexp(terms.astype(np.float64))[1]  # length classes: powers of two
    out = np.empty_like(a)
    for c in np.unique(cls):  # a handful of classes
        rows = np.flatnonzero(cls == c)
        width = int(terms[rows].max())
        step = max(_BLOCK // width, 1)
        j = np.arange(1, width + 1, dtype=np.float64)
        for lo in range(0, len(rows), step):
            r = rows[lo: lo + step]
            xr = x[r, None]
            logs = -np.cumsum(np.log1p((a[r, None] + j - xr) / xr), axis=1)
            top = np.maximum(logs.max(axis=1), 0.0)
            out[r] = top + np.log(np.exp(-top) + np.exp(logs - top[:, None]).sum(axis=1))
    return out


def gamma_p(a: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Regularized lower incomplete gamma P(a, x) for a > 0, x >= 0 (elementwise):
    x**a e**-x / Gamma(a + 1) times the series sum_n x**n / ((a + 1)...(a + n))."""
    a, x = np.broadcast_arrays(np.asarray(a, dtype=np.float64), np.asarray(x, dtype=np.float64))
    a, x = a.ravel(), x.ravel()
    out = np.zeros(a.shape)
    pos = x > 0
    if pos.any():
        aa, xx = a[pos], x[pos]
        out[pos] = np.minimum(np.exp(_log_front(aa, xx) - np.log(aa) + _log_series(aa, xx)), 1.0)
    return out


def gamma_quantile(p: float, a: np.ndarray) -> np.ndarray:
    """x with P(a, x) = p, for 0 < p < 1 and a >= 1 (elementwise in a; each distinct a solved once).

    Newton steps on log P (p below one half) or log Q = log(1 - P) (above): for a >= 1 both
    are concave in x (the gamma density is log-concave), so after at most one step the
    iterates approach the root from one side without overshooting; a bracket narrowed by
    bisection guards the first step.
    """
    a = np.asarray(a, dtype=np.float64)
    if a.size == 0:
        return a.copy()
    uniq, inv = np.unique(a, return_inverse=True)
    z = NormalDist().inv_cdf(p)
    lower_tail = p < 0.5
    target = math.log(p if lower_tail else 1.0 - p)
    # start: the Wilson-Hilferty approximation (kept positive); bracket [0, far in the upper tail]
    x = uniq * np.maximum(1.0 - 1.0 / (9.0 * uniq) + z / (3.0 * np.sqrt(uniq)), 0.05) ** 3
    lo = np.zeros_like(uniq)
    hi = uniq + 2.0 * (abs(z) + 5.0) * np.sqrt(uniq) + 2.0 * z * z + 50.0
    x = np.clip(x, _TINY, hi)
    active = np.arange(len(uniq))
    for _ in range(200):  # a few Newton steps; bisection guards the rest
        aa, xx = uniq[active], x[active]
        cdf = gamma_p(aa, xx)
        tail = cdf if lower_tail else 1.0 - cdf
        lo[active] = np.where(cdf < p, xx, lo[active])
        hi[active] = np.where(cdf > p, xx, hi[active])
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
            dens = np.exp(_log_front(aa, xx)) / xx
            slope = dens / tail if lower_tail else -dens / tail
            new = xx - (np.log(tail) - target) / slope
        finite = np.isfinite(new)
        done = (finite & (np.abs(new - xx) <= _XTOL * np.abs(xx))) | (cdf == p)
        bad = ~finite | (new < lo[active]) | (new > hi[active])
        new = np.where(bad & ~done, 0.5 * (lo[active] + hi[active]), new)
        x[active] = new
        active = active[~done]
        if not len(active):
            break
    return x[inv.reshape(-1)]


def poisson_limits(k: np.ndarray, alpha: float) -> tuple[np.ndarray, np.ndarray]:
    """Exact two-sided 1 - alpha limits of the Poisson mean for observed counts ``k`` (integers >= 0)."""
    k = np.asarray(k, dtype=np.float64)
    lower = np.zeros_like(k)
    some = k > 0
    lower[some] = gamma_quantile(alpha / 2, k[some])
    upper = gamma_quantile(1 - alpha / 2, k + 1.0)
    return lower, upper
