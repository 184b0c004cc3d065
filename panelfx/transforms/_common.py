"""Helpers shared by several transforms: baseline rows, relative change, exact differences, flag counts."""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pandas as pd

from .. import _kernels as K
from .._panel import Panel
from .._subjects import Subjects
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


def baseline_index(panel: Panel, col: str, rule: str, reference: str | float | None,
                   where: str | None = None) -> np.ndarray:
    """Per row (sorted order): the row holding the subject's baseline value of ``col``, or -1.
    ``where``: only rows where that column is true may hold the baseline."""
    s = panel.subjects
    allowed = sources(panel, where)
    if rule == "first":
        return s.first if allowed is None else K.first_index(s, allowed)
    valid = ~panel.columns.missing(col)
    if allowed is not None:
        valid &= allowed
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
    The time column gives durations in the derive unit (exact on the time axis).
    """
    if col == panel.time_col:  # the time column as a value: a duration, in the derive unit
        out = panel.elapsed_since(source)
        return out
    ints = panel.columns.integers(col)
    if ints is not None:
        a, b = ints, ints[np.maximum(source, 0)]
        # |a - b| taken modulo 2**64 as unsigned is exact for any two 64-bit integers; then the sign
        up = a >= b
        mag = np.where(up, a.view(np.uint64) - b.view(np.uint64), b.view(np.uint64) - a.view(np.uint64))
        out = mag.astype(np.float64)
        np.negative(out, out=out, where=~up)
        out[source < 0] = np.nan
        return out
    y = panel.columns.numeric(col)
    return y - K.take(y, source)


@dataclasses.dataclass(frozen=True, kw_only=True)
class FlagHistory(Transform):
    """Base of the event transforms (events so far, ever, time since): a flag column, whether the
    current occasion counts, how numbers read as flags, and which occasions may count."""

    col: str
    include_current: bool = True
    any_nonzero: bool = False
    where: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_bool("include_current", self.include_current)
        check_bool("any_nonzero", self.any_nonzero)
        check_where(self.where)

    def inputs(self) -> tuple[str, ...]:
        return with_where((self.col,), self.where)

    @property
    def past_only(self) -> bool:
        return True

    def _when(self) -> str:
        return "at or before" if self.include_current else "strictly before"

    def counts(self, panel: Panel) -> np.ndarray:
        """Events at the occasions so far (sorted order); a missing flag is not an event."""
        event = event_flags(panel, self.col, self.any_nonzero, self.where)
        count = K.running_count(panel.subjects, event)
        return count if self.include_current else count - event




def check_where(value: Any) -> None:
    """``where=``: the name of a true/false column, or None."""
    if value is not None:
        check_column_name("where", value)


def sources(panel: Panel, where: str | None, col: str | None = None) -> np.ndarray | None:
    """Rows that may serve as sources (sorted order): those where ``where`` holds and, when
    ``col`` is given, whose ``col`` is present; ``None`` when every row may."""
    mask = panel.columns.condition(where) if where is not None else None
    if col is not None:
        present = ~panel.columns.missing(col)
        mask = present if mask is None else mask & present
    return mask


def nth_source(s: Subjects, mask: np.ndarray, k: int) -> np.ndarray:
    """Per row: the k-th row before it in its subject where ``mask`` holds (k > 0), or the
    |k|-th after it (k < 0); -1 when there is none.  With ``mask`` all true this is a shift."""
    mask = mask.astype(bool, copy=False)
    rows = np.flatnonzero(mask)
    upto = np.cumsum(mask, dtype=np.int64)  # mask rows at or before each row, all subjects
    before = upto - mask
    if k > 0:
        target = before - k
        ok = target >= before[s.first]
    else:
        target = upto - k - 1
        last = s.ends[s.grp] - 1
        ok = target < upto[last] if s.n else np.zeros(0, dtype=bool)
    found = rows[np.clip(target, 0, max(len(rows) - 1, 0))] if len(rows) else np.zeros(s.n, dtype=np.int64)
    return np.where(ok, found, -1)


def with_where(inputs: tuple[str, ...], where: str | None) -> tuple[str, ...]:
    """A transform's input columns plus its ``where=`` column, if any."""
    return inputs if where is None else (*inputs, where)


def where_words(where: str | None) -> str:
    """How ``where=`` reads in a description."""
    return "" if where is None else f"; only occasions where {where!r} is true serve as sources"


def event_flags(panel: Panel, col: str, any_nonzero: bool, where: str | None) -> np.ndarray:
    """Sorted rows at which ``col`` marks an event: true (booleans or 0/1; any non-zero number
    only with ``any_nonzero``), not missing, and, with ``where``, at an occasion where it holds."""
    event, _ = panel.columns.flags(col, any_nonzero=any_nonzero)
    allowed = sources(panel, where)
    return event if allowed is None else event & allowed


def flag_words(any_nonzero: bool, where: str | None) -> str:
    """How the event options read in a description."""
    words = "; any non-zero number counts as true" if any_nonzero else ""
    return words + ("" if where is None else f"; only occasions where {where!r} is true count")
