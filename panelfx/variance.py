"""Where the variability sits: variance components of nested levels, ICC and design effect.

:func:`variance_components` splits the variance of one column over nested levels (region >
clinic > subject > rows); :func:`design_effect` is the planning formula for clustered
samples.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Literal

import numpy as np
import pandas as pd

from ._columns import to_float
from ._frames import frames
from ._nesting import CODES, Codes, check_levels, compact, level_codes, parents
from ._options import checked_options
from ._panel import require_columns
from ._transform import check_choice
from .errors import MissingDependencyError, OptionError

METHODS = ("anova", "reml")
Method = Literal["anova", "reml"]

#: Columns of the table returned by :func:`variance_components`, in order.
TABLE_COLUMNS = ("level", "units", "mean_size", "df", "sum_sq", "mean_sq", "variance", "negative", "share", "icc")


@checked_options
@frames()
def variance_components(
    frame: pd.DataFrame,
    col: str,
    *,
    levels: str | Sequence[str],
    method: Method = "anova",
    codes: Codes = "within_parent",
) -> pd.DataFrame:
    """How the variance of ``col`` splits over nested ``levels`` (outermost first) and the rows.

    One row per level, then a row ``"residual"`` for the rows themselves (occasions):

    - ``units``: units of the level with at least one value (rows for the residual);
      ``mean_size``: values per unit;
    - ``df``, ``sum_sq``, ``mean_sq``: the nested analysis-of-variance table (each level's
      unit means about their parent's mean, weighted by unit size; the residual about the
      innermost unit means);
    - ``variance``: the variance component as estimated (it can be negative with the
      ANOVA method: reported as computed, with ``negative`` True);
    - ``share``: the component's part of the total, negative components counted as 0;
    - ``icc``: the intraclass correlation of the level, the correlation of two rows that
      share a unit of that level: the sum of the shares of that level and every level
      above it (missing for the residual row).

    ``frame.attrs`` of the result: ``column``, ``levels``, ``method``, ``n`` (values used),
    ``n_missing`` (rows without a value, left out), ``grand_mean``, ``design_effect`` (of the
    mean of the ``n`` values: ``1 + sum over levels of (sum_u n_u**2 / n - 1) * share``,
    exactly Var(mean) / (total variance / n) for the estimated components, whatever the
    unit sizes) and ``n_effective`` (``n / design_effect``).

    ``method="anova"`` (default, no dependency): the method of moments on the nested
    sums of squares (Henderson's Method I; Searle, Casella & McCulloch, *Variance
    Components*, 1992).  Each level's sum of squares is set equal to its expectation
    under the random-effects model, whose coefficients are computed from the actual unit
    sizes, so the estimates are unbiased for balanced and unbalanced data alike; for
    balanced data these are the classical expected mean squares.  ``grand_mean`` is the
    mean of the values.  ``method="reml"``: restricted maximum likelihood through
    statsmodels' ``MixedLM`` (an optional dependency): a random intercept for the
    outermost level and a variance component for each inner one, on unit codes made
    unique along the chain; ``grand_mean`` is the fitted intercept.  REML estimates are
    never negative.

    ``codes="within_parent"`` (default): codes may repeat across parents (clinic "C1" of
    two regions is two clinics); ``codes="unique"``: a code names one unit, and one seen
    under two parents is a :class:`~panelfx.NestingError` naming the level and codes.

    Missing values of ``col`` are left out (counted in ``n_missing``); a missing level code
    is a :class:`~panelfx.NullKeyError`.  A level with as many units as its parent level
    (or a residual with one row per innermost unit) cannot be separated: an
    :class:`~panelfx.OptionError`.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"clinic": ["A", "A", "A", "A", "B", "B", "B", "B"],
    ...                    "pid": [1, 1, 2, 2, 1, 1, 2, 2],
    ...                    "y": [10.0, 12.0, 15.0, 17.0, 20.0, 21.0, 26.0, 25.0]})
    >>> vc = pfx.variance_components(df, "y", levels=["clinic", "pid"])
    >>> vc[["level", "units", "variance", "share", "icc"]]
          level  units  variance     share       icc
    0    clinic      2    38.875  0.747596  0.747596
    1       pid      4    11.875  0.228365  0.975962
    2  residual      8     1.250  0.024038       NaN
    >>> round(vc.attrs["design_effect"], 4), round(vc.attrs["n_effective"], 3)
    (3.4712, 2.305)
    """
    if not isinstance(col, str) or not col:
        raise OptionError(f"col must be a column name, got {col!r}")
    names = check_levels(levels)
    if col in names:
        raise OptionError(f"col {col!r} is also one of the levels")
    check_choice("method", method, METHODS)
    check_choice("codes", codes, CODES)
    require_columns(frame, [col], "value")
    y = to_float(frame[col])
    unit_codes = level_codes(frame, names, codes)
    valid = ~np.isnan(y)
    n = int(valid.sum())
    if n == 0:
        raise OptionError(f"column {col!r} has no value to split", column=col, count=len(frame))
    yv = y[valid]
    units: list[np.ndarray] = []
    sizes: list[int] = []
    for c in unit_codes:
        u, k = compact(c[valid])
        units.append(u)
        sizes.append(k)
    table = _anova(yv, units, sizes, names)
    if method == "reml":
        variance, grand_mean = _reml(yv, units)
    else:
        variance, grand_mean = table.pop("variance"), _mean(yv)
    variance = np.asarray(variance, dtype=np.float64)
    kept = np.maximum(variance, 0.0)
    total = kept.sum()
    with np.errstate(invalid="ignore", divide="ignore"):
        share = kept / total
    icc = np.append(np.cumsum(share[:-1]), np.nan)
    out = pd.DataFrame({
        "level": [*names, "residual"],
        "units": np.asarray([*sizes, n], dtype=np.int64),
        "mean_size": n / np.asarray([*sizes, n], dtype=np.float64),
        "df": table["df"].astype(np.int64),
        "sum_sq": table["sum_sq"],
        "mean_sq": table["sum_sq"] / table["df"],
        "variance": variance,
        "negative": variance < 0,
        "share": share,
        "icc": icc,
    })
    # Var(mean) / (total / n) = 1 + sum_levels (sum_u n_u^2 / n - 1) * share_level, exactly.
    size_sq = np.array([np.bincount(u).astype(np.float64) @ np.bincount(u) / n for u in units])
    deff = float(1.0 + (size_sq - 1.0) @ share[:-1])
    out.attrs.update({"column": col, "levels": names, "method": method, "n": n, "n_missing": len(y) - n,
                      "grand_mean": grand_mean, "design_effect": deff, "n_effective": n / deff})
    return out


def _mean(v: np.ndarray) -> float:
    m = v.sum() / len(v)
    return float(m + (v - m).sum() / len(v))  # one correction pass


def _unit_means(y: np.ndarray, unit: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    n = np.bincount(unit, minlength=k).astype(np.float64)
    m = np.bincount(unit, weights=y, minlength=k) / n
    m += np.bincount(unit, weights=y - m[unit], minlength=k) / n  # one correction pass
    return m, n


def _anova(y: np.ndarray, units: list[np.ndarray], sizes: list[int], names: list[str]) -> dict[str, np.ndarray]:
    """Nested sums of squares and the Method I estimates (see variance_components).

    Levels are numbered 1..L (0: the grand mean, L + 1: the rows).  With T_k the sum over
    units u of level k of S_u**2 / n_u, the expectation of SS_k = T_k - T_(k-1) is
    sum_j var_j * (C(k, j) - C(k-1, j)) + df_k * var_e, where C(k, j) is n for j <= k and
    sum over units v of level j of n_v**2 / n_(ancestor of v at level k) for j > k.
    """
    n, big_l = len(y), len(units)
    grand = _mean(y)
    means, counts = zip(*(_unit_means(y, u, k) for u, k in zip(units, sizes)))
    up = [parents(units[k], units[k - 1], sizes[k]) if k else np.zeros(sizes[0], dtype=np.int64)
          for k in range(big_l)]
    ss = np.empty(big_l + 1)
    for k in range(big_l):
        parent_mean = means[k - 1][up[k]] if k else np.full(sizes[0], grand)
        ss[k] = counts[k] @ (means[k] - parent_mean) ** 2
    ss[big_l] = ((y - means[-1][units[-1]]) ** 2).sum()
    df = np.diff(np.asarray([1, *sizes, n], dtype=np.float64))
    for k, d in enumerate(df):
        if d <= 0:
            what = (f"level {names[k]!r} has as many units as its parent level" if k < big_l else
                    f"every unit of level {names[-1]!r} has a single value")
            raise OptionError(f"{what}: its variance cannot be told apart from the level "
                              f"{'below' if k < big_l else 'above'}; drop a level")

    def coef(k: int, j: int) -> float:
        """C(k, j): levels k = 0..L, j = 1..L (1-based as in the docstring)."""
        if j <= k:
            return float(n)
        anc = np.arange(sizes[j - 1])
        for m in range(j - 1, k - 1, -1):  # climb from level j to level k
            anc = up[m][anc] if m else np.zeros_like(anc)
        denom = counts[k - 1][anc] if k else np.full(len(anc), float(n))
        return float((counts[j - 1] ** 2 / denom).sum())

    a = np.zeros((big_l + 1, big_l + 1))
    for k in range(1, big_l + 1):
        for j in range(k, big_l + 1):
            a[k - 1, j - 1] = coef(k, j) - coef(k - 1, j)
        a[k - 1, big_l] = df[k - 1]
    a[big_l, big_l] = df[big_l]
    return {"df": df, "sum_sq": ss, "variance": np.linalg.solve(a, ss)}


def _reml(y: np.ndarray, units: list[np.ndarray]) -> tuple[np.ndarray, float]:
    try:
        from statsmodels.regression.mixed_linear_model import MixedLM
    except ImportError as err:
        raise MissingDependencyError("method='reml' needs statsmodels, an optional dependency: "
                                     "pip install 'panelfx[models]'", extra="models") from err
    data = pd.DataFrame({"y": y, **{f"g{k}": u for k, u in enumerate(units)}})
    if len(units) == 1:
        model = MixedLM(y, np.ones((len(y), 1)), groups=units[0])
    else:
        # codes are unique along the chain, so each inner level is one variance component
        vc = {f"g{k}": f"0 + C(g{k})" for k in range(1, len(units))}
        model = MixedLM.from_formula("y ~ 1", groups="g0", re_formula="1", vc_formula=vc, data=data)
    fit = model.fit(reml=True)
    inner = dict(zip(model.exog_vc.names, np.asarray(fit.vcomp))) if len(units) > 1 else {}
    variance = [float(np.asarray(fit.cov_re)[0, 0]), *(float(inner[f"g{k}"]) for k in range(1, len(units))),
                float(fit.scale)]
    return np.asarray(variance), float(np.asarray(fit.fe_params)[0])


@checked_options
def design_effect(*, icc: float, size: float, cv: float = 0.0) -> float:
    """Design effect of a mean over clusters, for planning: ``1 + ((1 + cv**2) * size - 1) * icc``.

    ``icc``: intraclass correlation (0 to 1); ``size``: mean cluster size (at least 1);
    ``cv``: coefficient of variation of the cluster sizes (their standard deviation with
    divisor K, the number of clusters, over their mean).  With ``cv=0`` this is Kish's
    ``1 + (size - 1) * icc`` (Kish, *Survey Sampling*, 1965); with ``cv > 0`` the form for
    unequal cluster sizes of Eldridge, Ashby & Kerry (2006), *Int J Epidemiol* 35:1292-1300.
    Since ``(1 + cv**2) * size`` is then the sum of squared sizes over the total, the
    value equals the ``design_effect`` of :func:`variance_components` for two levels.
    Divide a sample size by it for the effective sample size.

    >>> import panelfx as pfx
    >>> pfx.design_effect(icc=0.2, size=7)
    2.2
    >>> round(pfx.design_effect(icc=0.05, size=20, cv=0.5), 4)
    2.2
    """
    for name, value in (("icc", icc), ("size", size), ("cv", cv)):
        if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
                or not math.isfinite(value):
            raise OptionError(f"{name} must be a finite number, got {value!r}")
    if not 0 <= icc <= 1:
        raise OptionError(f"icc must be between 0 and 1, got {icc!r}")
    if size < 1:
        raise OptionError(f"size (mean cluster size) must be at least 1, got {size!r}")
    if cv < 0:
        raise OptionError(f"cv must be 0 or more, got {cv!r}")
    return float(1.0 + ((1.0 + cv * cv) * size - 1.0) * icc)


__all__ = ["variance_components", "design_effect", "TABLE_COLUMNS"]
