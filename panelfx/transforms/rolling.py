"""Rolling summaries: a statistic over a window of occasions, a span of time, or the history so far."""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .. import _windows as W
from .._options import checked_options
from .._panel import Panel
from .._subjects import Subjects
from .._transform import Transform, check_bool, check_choice, check_column_name, check_int, check_name
from ..errors import OptionError
from ._common import check_where, sources, where_words, with_where
from ._spans import check_span, span_label

STATS = ("mean", "sum", "count", "min", "max", "std", "var", "median")
CLOSED = W.CLOSED

_WORDS = {"mean": "mean", "sum": "sum", "count": "number of non-missing values", "min": "minimum",
          "max": "maximum", "std": "sample standard deviation", "var": "sample variance", "median": "median"}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Rolling(Transform):
    """Configured :func:`rolling`."""

    type_name = "rolling"
    col: str
    stat: Literal["mean", "sum", "count", "min", "max", "std", "var", "median"] = "mean"
    occasions: int | None = None
    span: float | int | str | None = None
    closed: Literal["right", "both", "left", "neither"] = "right"
    min_valid: int = 1
    exclude_current: bool = False
    where: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_choice("stat", self.stat, STATS)
        if self.occasions is not None and self.span is not None:
            raise OptionError("give occasions= (a number of occasions) or span= (a length of time), not both")
        if self.occasions is not None:
            check_int("occasions", self.occasions, minimum=1)
        if self.span is not None:
            # Timedeltas become text such as "90D", so the options stay plain values.
            object.__setattr__(self, "span", check_span("span", self.span))
        check_choice("closed", self.closed, CLOSED)
        if self.closed != "right" and self.span is None:
            raise OptionError(
                f"closed={self.closed!r} applies to time windows (span=) only; to leave out the current "
                f"occasion use exclude_current=True"
            )
        check_int("min_valid", self.min_valid, minimum=0)
        if self.occasions is not None and self.min_valid > self.occasions:
            raise OptionError(
                f"min_valid={self.min_valid} is more than occasions={self.occasions}: every value would be missing"
            )
        check_bool("exclude_current", self.exclude_current)
        check_where(self.where)

    # ------------------------------------------------------------------ protocol
    def inputs(self) -> tuple[str, ...]:
        return with_where((self.col,), self.where)

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        if self.occasions is not None:
            window = f"{self.occasions}occ"
        elif self.span is None:
            window = "sofar"
        else:
            window = span_label(self.span)
        prior = "_prior" if self.exclude_current else ""
        return (f"{self.col}_{self.stat}_{window}{prior}",)

    @property
    def past_only(self) -> bool:
        # Every window ends at the current occasion or before it.
        return True

    def describe(self) -> str:
        least = max(self.min_valid, 2 if self.stat in ("std", "var") else 1)
        return (f"{_WORDS[self.stat]} of {self.col!r} over {self._window_words()}; non-missing values only, "
                + ("never missing" if self.stat == "count" else
                   f"missing when the window has fewer than {least} non-missing value(s)")
                + where_words(self.where))

    def _window_words(self) -> str:
        now = not self.exclude_current
        if self.occasions is not None:
            k = self.occasions
            if now:
                return f"the last {k} occasion(s) up to the current one"
            return f"the {k} occasion(s) before the current one"
        if self.span is None:
            return "all occasions up to the current one" if now else "all earlier occasions"
        left = "[" if self.closed in ("both", "left") else "("
        right = "]" if now and self.closed in ("both", "right") else ")"
        return f"times in {left}t - {self.span}, t{right}"

    def compute(self, panel: Panel) -> Sequence[Any]:
        y = panel.columns.numeric(self.col)
        allowed = sources(panel, self.where)
        if allowed is not None:  # values of rows that may not serve as sources are left out
            y = np.where(allowed, y, np.nan)
        span = None if self.span is None else panel.span(self.span, "span")
        b = W.bounds(panel, occasions=self.occasions, span=span, closed=self.closed,
                     exclude_current=self.exclude_current)
        valid = ~np.isnan(y)
        cnt = W.count(b, valid)
        if self.stat == "count":
            return [cnt]
        out = self._statistic(panel.subjects, b, y, valid, cnt)
        out[cnt < self.min_valid] = np.nan
        out += 0.0  # one zero: min/max of {0.0, -0.0} would otherwise depend on their order
        return [out]

    def _statistic(self, s: Subjects, b: W.Bounds, y: np.ndarray, valid: np.ndarray,
                   cnt: np.ndarray) -> np.ndarray:
        stat = self.stat
        if stat in ("min", "max"):
            return W.extreme(b, y, np.fmin if stat == "min" else np.fmax)
        if stat == "median":
            out = np.full(s.n, np.nan)
            rows = np.flatnonzero(cnt >= max(self.min_valid, 1))
            out[rows] = W.median(b, y, rows)
            return out
        infinite = np.isinf(y)
        has_inf = bool(infinite.any())
        if stat in ("sum", "mean"):
            v0 = np.where(valid & ~infinite, y, 0.0)
            out = W.total(s, b, v0)
            if has_inf:  # IEEE sums: +inf wins, unless -inf is there too
                up = W.count(b, y == np.inf) > 0
                down = W.count(b, y == -np.inf) > 0
                out = np.where(up & down, np.nan, np.where(up, np.inf, np.where(down, -np.inf, out)))
            if stat == "mean":
                with np.errstate(invalid="ignore", divide="ignore"):
                    np.divide(out, cnt, out=out)  # in place: out is this call's own array
            return out
        finite = valid & ~infinite
        yf = np.where(infinite, np.nan, y) if has_inf else y
        out = W.variance(s, b, yf, finite, W.count(b, finite) if has_inf else cnt)
        if has_inf:
            out[W.count(b, infinite) > 0] = np.nan
        return np.sqrt(out) if stat == "std" else out


@checked_options
def rolling(
    col: str,
    stat: Literal["mean", "sum", "count", "min", "max", "std", "var", "median"] = "mean",
    *,
    occasions: int | None = None,
    span: float | int | str | _dt.timedelta | None = None,
    closed: Literal["right", "both", "left", "neither"] = "right",
    min_valid: int = 1,
    exclude_current: bool = False,
    where: str | None = None,
    name: str | None = None,
) -> Rolling:
    """A statistic of ``col`` over a window that ends at each occasion of the subject.

    Windows (give at most one of ``occasions`` and ``span``):

    - ``occasions=k``: the last k occasions of the subject, the current one included
      (fewer at the subject's start); with ``exclude_current=True`` the k before it.
    - ``span=s``: the occasions whose time lies within s before the current time: a
      number in the time column's units, or for datetime times a time span such as
      ``"90D"``, ``"12h"`` or a ``timedelta`` (months and years, having no fixed
      length, are not accepted).  ``closed`` says which ends belong to the window:
      ``"right"`` (default) (t - s, t], ``"both"`` [t - s, t], ``"left"`` [t - s, t),
      ``"neither"`` (t - s, t).  The default reads "the last 90 days" as today and the
      89 days before it, leaving out the day exactly 90 days ago.
    - neither: the whole history up to the current occasion (mean so far, worst so far).

    Statistics: ``"mean"``, ``"sum"``, ``"count"``, ``"min"``, ``"max"``, ``"median"``,
    ``"std"`` and ``"var"`` (sample standard deviation and variance, divisor n - 1).

    ``where`` (a true/false column): only occasions where it is true contribute values
    (the worst value so far after baseline, say); the window itself is unchanged and every
    row still receives a value.

    Missing values: a window is made of occasions, whether or not their value is
    missing, and each statistic uses the window's non-missing values.  ``count`` is their
    number and is never missing.  Every other statistic is missing when the window holds
    fewer than ``min_valid`` (default 1) non-missing values; std and var also below two,
    and a sum over no value is 0 when ``min_valid=0``.  Infinite values follow IEEE
    arithmetic (var and std of a window holding one are missing).

    Past-only: each value uses the current and earlier occasions only;
    ``exclude_current=True`` leaves out the current occasion too, as a feature that
    predicts it must.  Booleans count as 0/1; text and datetime columns are errors.
    Outputs are float64 (``count`` is int64).  Default name: ``<col>_<stat>_<window>``
    where the window is ``<k>occ``, the span as written (``90``, ``90D``) or ``sofar``,
    followed by ``_prior`` when the current occasion is left out.

    Cost: O(n) for count, sum, mean, var and std (prefix sums), O(n log w) for min and
    max, O(n w log w) for the median over windows of w rows.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "day": [0, 30, 60, 120, 0],
    ...                    "sbp": [150, 144, None, 138, 160]})
    >>> pfx.derive(df, pfx.rolling("sbp", span=90), pfx.rolling("sbp", "max", occasions=2),
    ...           pfx.rolling("sbp", "count", exclude_current=True), id="pid", time="day")
       pid  day    sbp  sbp_mean_90  sbp_max_2occ  sbp_count_sofar_prior
    0    1    0  150.0        150.0         150.0                      0
    1    1   30  144.0        147.0         150.0                      1
    2    1   60    NaN        147.0         144.0                      2
    3    1  120  138.0        138.0         138.0                      2
    4    2    0  160.0        160.0         160.0                      0
    """
    # a timedelta span becomes text such as "90D" in __post_init__, so the stored option stays plain
    return Rolling(col=col, stat=stat, occasions=occasions, span=span,  # type: ignore[arg-type]
                   closed=closed, min_valid=min_valid, exclude_current=exclude_current, where=where, name=name)
