"""Helpers shared by several transforms: baseline rows, relative change, exact differences, flag counts."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from .. import _kernels as K
from .._panel import Panel
from .._transform import Transform, check_bool, check_choice, check_column_name, check_name
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
    s = panel.subjects
    if rule == "first":
        return s.first
    valid = ~panel.columns.missing(col)
    if rule == "first_valid":
        return K.first_index(s, valid)
    ref = _reference_times(panel, reference)
    return K.last_index_in_subject(s, valid & (panel.axis.key <= ref))


def _reference_times(panel: Panel, reference: str | float | None) -> np.ndarray:
    """The subject's reference time on every row, on the time key scale (a key at or below it
    is on or before the reference; below every key when the subject has none)."""
    if not isinstance(reference, str):
        if panel.time_kind != "number":
            raise OptionError(
                f"reference={reference!r} is a number but time column {panel.time_col!r} holds "
                f"{panel.time_kind} values: give a column of reference times"
            )
        ref, _ = panel.axis.reference(pd.Series([reference], name="reference"))
        return np.full(panel.n, ref[0])
    ref, missing = panel.reference(reference)
    first = K.first_index(panel.subjects, ~missing)
    subject_ref = ref[np.maximum(first, 0)]
    # constant within subject, judged on the values as given (not as rounded to the time's ticks)
    raw = panel.sort(panel.columns.series(reference).to_numpy())
    varies = ~missing & (raw != raw[np.maximum(first, 0)])
    if varies.any():
        where = np.flatnonzero(varies)
        ids = panel.ids_at(where)
        raise NotConstantError(
            rows_message("reference time varies within subject", reference, len(where), ids),
            column=reference, count=len(where), ids=ids,
        )
    return np.where(first >= 0, subject_ref, np.iinfo(np.int64).min)


def relative_change(y: np.ndarray, ref: np.ndarray, kind: str) -> np.ndarray:
    """y - ref, 100 (y - ref) / ref or y / ref; the last two missing where ref is 0 or missing."""
    if kind == "difference":
        return y - ref
    with np.errstate(divide="ignore", invalid="ignore"):
        out = (y - ref) / ref * 100.0 if kind == "percent" else y / ref
    out[ref == 0] = np.nan
    return out


def difference(panel: Panel, col: str, source: np.ndarray) -> np.ndarray:
    """Per sorted row: ``col`` minus its value at sorted row ``source`` (-1: missing), float64.

    Integer columns are subtracted as integers, so values beyond 2**53 give exact
    differences (rounded once, to float64, only if the difference itself exceeds 2**53).
    """
    ints = panel.columns.integers(col)
    if ints is not None and (ints.size == 0 or int(ints.max()) - int(ints.min()) <= np.iinfo(np.int64).max):
        out = (ints - ints[np.maximum(source, 0)]).astype(np.float64)
        out[source < 0] = np.nan
        return out
    y = panel.columns.numeric(col)
    return y - K.take(y, source)


@dataclasses.dataclass(frozen=True, kw_only=True)
class FlagHistory(Transform):
    """Base of :class:`EventsSoFar` and :class:`~panelfx.transforms.ever.Ever`: counts of a flag so far."""

    col: str
    include_current: bool = True
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_bool("include_current", self.include_current)

    def inputs(self) -> tuple[str, ...]:
        return (self.col,)

    @property
    def past_only(self) -> bool:
        return True

    def _when(self) -> str:
        return "at or before" if self.include_current else "strictly before"

    def counts(self, panel: Panel) -> np.ndarray:
        """Events at the occasions so far (sorted order); a missing flag is not an event."""
        event, _ = panel.columns.flags(self.col)
        count = K.running_count(panel.subjects, event)
        return count if self.include_current else count - event


