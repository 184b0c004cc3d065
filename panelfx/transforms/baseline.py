"""Baseline: a subject's reference value, carried to every one of its rows."""

from __future__ import annotations

import dataclasses
from typing import Any, Sequence

import numpy as np

from .. import _kernels as K
from .._panel import Panel
from .._transform import Transform, check_choice, check_column_name, check_name
from ..errors import NotConstantError, OptionError, rows_message

RULES = ("first", "first_valid", "last_before")


def check_rule(rule: str, reference: str | float | None) -> None:
    """Validate a baseline rule and its reference (shared with change from baseline)."""
    check_choice("rule", rule, RULES)
    if rule == "last_before":
        if reference is None:
            raise OptionError("rule='last_before' needs reference= (a column of reference times, or a number)")
        if isinstance(reference, bool) or not isinstance(reference, (str, int, float)):
            raise OptionError(f"reference must be a column name or a number, got {reference!r}")
    elif reference is not None:
        raise OptionError(f"reference= is used only with rule='last_before', not rule={rule!r}")


def reference_columns(reference: str | float | None) -> tuple[str, ...]:
    return (reference,) if isinstance(reference, str) else ()


def rule_words(rule: str, reference: str | float | None) -> str:
    if rule == "first":
        return "value at the subject's first occasion"
    if rule == "first_valid":
        return "first non-missing value of the subject"
    ref = f"column {reference!r}" if isinstance(reference, str) else f"time {reference!r}"
    return f"last non-missing value on or before the reference time ({ref})"


def baseline_index(panel: Panel, col: str, rule: str, reference: str | float | None) -> np.ndarray:
    """Per row (sorted order): the row holding the subject's baseline value of ``col``, or -1."""
    if rule == "first":
        return panel.starts[panel.grp]
    valid = ~panel.missing(col)
    if rule == "first_valid":
        return K.first_index(panel, valid)
    ref = _reference_times(panel, reference)
    return K.last_index_in_subject(panel, valid & (panel.t <= ref))


def _reference_times(panel: Panel, reference: str | float | None) -> np.ndarray:
    """The subject's reference time on every row (below every time when it has none)."""
    if not isinstance(reference, str):
        if panel.time_kind != "number":
            raise OptionError(
                f"reference={reference!r} is a number but time column {panel.time_col!r} holds "
                f"{panel.time_kind} values: give a column of reference times"
            )
        return np.full(panel.n, float(reference))
    ref = panel.time_values(reference)
    missing = panel.is_time_missing(ref)
    first = K.first_index(panel, ~missing)
    subject_ref = ref[np.maximum(first, 0)]
    varies = ~missing & (ref != subject_ref)
    if varies.any():
        where = np.flatnonzero(varies)
        ids = panel.ids_at(where)
        raise NotConstantError(
            rows_message("reference time varies within subject", reference, len(where), ids),
            column=reference, count=len(where), ids=ids,
        )
    none = -np.inf if ref.dtype.kind == "f" else np.iinfo("int64").min
    return np.where(first >= 0, subject_ref, none)


@dataclasses.dataclass(frozen=True, kw_only=True)
class Baseline(Transform):
    """Configured :func:`baseline`."""

    type_name = "baseline"
    col: str
    rule: str = "first_valid"
    reference: str | float | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_rule(self.rule, self.reference)

    def inputs(self) -> tuple[str, ...]:
        return (self.col, *reference_columns(self.reference))

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_baseline",)

    @property
    def past_only(self) -> bool:
        # The baseline may lie after an early missing occasion, or be chosen by a later reference.
        return False

    def describe(self) -> str:
        return f"baseline of {self.col!r}: {rule_words(self.rule, self.reference)}, carried to every row of the subject"

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [panel.gather(self.col, baseline_index(panel, self.col, self.rule, self.reference))]


def baseline(
    col: str,
    rule: str = "first_valid",
    *,
    reference: str | float | None = None,
    name: str | None = None,
) -> Baseline:
    """The subject's baseline value of ``col``, carried to every row of the subject.

    Rules:

    - ``"first_valid"`` (default): the first non-missing value of the subject.
    - ``"first"``: the value at the subject's first occasion, even when it is missing.
    - ``"last_before"``: the last non-missing value on or before the subject's reference
      time, given by ``reference`` (a column of times, constant within subject, such as
      the start of treatment; or a number for numeric times).  This is the usual
      convention of clinical-trial analysis datasets; CDISC ADaM leaves the exact rule to
      the analysis plan.

    Missing values: a subject with no qualifying value gets a missing baseline on every
    row.  The output keeps the column's dtype (integers become float64 only when a
    baseline is missing).  Not past-only: the baseline can come from a later occasion.
    Default name: ``<col>_baseline``.

    >>> import pandas as pd, panelfx as px
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 60, 0, 30],
    ...                    "sbp": [None, 150, 140, 162, 158]})
    >>> px.derive(df, px.baseline("sbp"), id="pid", time="day")
       pid  day    sbp  sbp_baseline
    0    1    0    NaN         150.0
    1    1   30  150.0         150.0
    2    1   60  140.0         150.0
    3    2    0  162.0         162.0
    4    2   30  158.0         162.0
    """
    return Baseline(col=col, rule=rule, reference=reference, name=name)
