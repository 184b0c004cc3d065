"""Treatment-emergent events: flag each event record by its onset against the subject's dosing."""

from __future__ import annotations

from collections.abc import Sequence
from fractions import Fraction
from typing import Any, Literal

import numpy as np
import pandas as pd

from ._columns import to_float
from ._frames import frames
from ._panel import as_id_list, require_columns
from ._tables import _family, common_axis
from ._time import INT_MAX, INT_MIN, TimeAxis
from .errors import ColumnExistsError, ColumnTypeError, NullKeyError, OptionError, TimeTypeError, rows_message
from .transforms._spans import check_span, span_words

__all__ = ["treatment_emergent", "REASONS"]

#: Reasons in the order the rules are tried (the window reason names ``after_last``).
REASONS = ("no dosing", "onset unknown", "before first dose", "after window", "severity unknown",
           "worsened after first dose", "pre-existing, not worsened", "on treatment", "within {} after last dose")


@frames(frame="events", result="added", also=("dosing",))
def treatment_emergent(
    events: pd.DataFrame,
    dosing: pd.DataFrame,
    *,
    id: str | Sequence[str],
    onset: str,
    start: str,
    end: str,
    after_last: str | float,
    severity: str | None = None,
    prior: str | None = None,
    open_end: Literal["error", "until_time"] = "error",
    names: tuple[str, str] = ("treatment_emergent", "treatment_emergent_reason"),
) -> pd.DataFrame:
    """The event table with a treatment-emergent flag and the reason for it, per event record.

    For each event (``onset`` time) the subject's dosing records give the first dose (the
    earliest ``start``) and the last dose (the latest ``end``, its day included).
    ``after_last`` (a number, or a span such as ``"30D"``; no default, it is study
    specific) is the window after the last dose in which an event still counts.  The
    rules, first match wins:

    1. the subject has no dosing record: not emergent, ``"no dosing"``;
    2. onset missing: emergent, ``"onset unknown"`` (the conservative reading);
    3. onset after last dose + ``after_last``: not emergent, ``"after window"``;
    4. with ``severity`` and ``prior`` (the severity the condition had before the first
       dose, missing when it did not exist then): a pre-existing condition (prior
       present) is emergent only when its severity rose, ``"worsened after first dose"``,
       else ``"pre-existing, not worsened"``; ``"severity unknown"`` (emergent) when its
       severity is missing;
    5. onset before the first dose: not emergent, ``"before first dose"``;
    6. onset from the first to the last dose day: emergent, ``"on treatment"``;
    7. onset within ``after_last`` after the last dose: emergent, ``"within <N> after last dose"``.

    ``severity`` and ``prior`` hold ordered grades: numbers, or ordered categories of one
    type.  A dosing record without an end is an error, or with ``open_end="until_time"``
    still running (every later onset is on treatment).  The events keep their rows,
    index and columns; the flag is boolean, the reason a categorical.  Events of subjects
    absent from the dosing table are ``"no dosing"``.  ``names`` gives the two new columns.

    >>> import pandas as pd, panelfx as pfx
    >>> ae = pd.DataFrame({"pid": [1, 1, 1, 2], "onset": [1, 5, 40, 3]})
    >>> ex = pd.DataFrame({"pid": [1], "start": [3], "end": [20]})
    >>> pfx.treatment_emergent(ae, ex, id="pid", onset="onset", start="start", end="end", after_last=14)
       pid  onset  treatment_emergent treatment_emergent_reason
    0    1      1               False         before first dose
    1    1      5                True              on treatment
    2    1     40               False              after window
    3    2      3               False                 no dosing
    """
    for frame, what in ((events, "events"), (dosing, "dosing")):
        if not isinstance(frame, pd.DataFrame):
            raise TypeError(f"{what} must be a pandas DataFrame, got {type(frame).__name__}")
    ids = as_id_list(id)
    require_columns(events, [*ids, onset, *(c for c in (severity, prior) if c)], "events")
    require_columns(dosing, [*ids, start, end], "dosing")
    if (severity is None) != (prior is None):
        raise OptionError("severity= and prior= go together: the grade of the event and the grade the condition "
                          "had before the first dose")
    if open_end not in ("error", "until_time"):
        raise OptionError(f"open_end must be one of ['error', 'until_time'], got {open_end!r}")
    if not (isinstance(names, (list, tuple)) and len(names) == 2 and all(isinstance(n, str) and n for n in names)
            and names[0] != names[1]):
        raise OptionError(f"names must be two different column names (flag, reason), got {names!r}")
    for n in names:
        if n in events.columns:
            raise ColumnExistsError(f"output column {n!r} is already in the events frame; choose another with names=",
                                    column=n, count=1)
    after_last = check_span("after_last", after_last, allow_zero=True)
    ev_code, dose_code = _subjects(events, dosing, ids)

    on_ax, on_missing = _read(events[onset], "events")
    st_ax, st_missing = _read(dosing[start], "dosing")
    en_ax, en_missing = _read(dosing[end], "dosing")
    if st_missing.any():
        where = np.flatnonzero(st_missing)
        raise NullKeyError(rows_message("missing dosing start", start, len(where), list(dosing.index[where[:5]]),
                                        noun="row labels"), column=start, count=len(where))
    if en_missing.any() and open_end == "error":
        where = np.flatnonzero(en_missing)
        raise NullKeyError(rows_message("dosing records without an end (open_end='until_time' lets them run on)",
                                        end, len(where), list(dosing.index[where[:5]]), noun="row labels"),
                           column=end, count=len(where))
    axis, (t_on, t_st, t_en) = common_axis(on_ax, [(st_ax, f"dosing column {start!r}"),
                                                  (en_ax, f"dosing column {end!r}")])
    binary = axis.binary
    top: Any = np.inf if binary else INT_MAX
    low: Any = -np.inf if binary else INT_MIN
    t_en = np.where(en_missing, top, t_en)
    k = int(max(ev_code.max(initial=-1), dose_code.max(initial=-1))) + 1
    first = np.full(k, top, dtype=t_on.dtype)
    last = np.full(k, low, dtype=t_on.dtype)
    np.minimum.at(first, dose_code, t_st)
    np.maximum.at(last, dose_code, t_en)
    f = first[ev_code]
    lst = last[ev_code]
    dosed = f != top
    span = axis.span(after_last, "after_last")
    if binary:
        limit = lst + float(span)
    else:
        w = int(Fraction(span).numerator // Fraction(span).denominator)  # whole ticks: onset <= last + w
        limit = np.where(lst > INT_MAX - w, INT_MAX, lst + w) if w else lst
    limit = np.where(lst == top, top, limit)
    after = ~on_missing & (t_on > limit)
    before = ~on_missing & (t_on < f)
    on = ~on_missing & (t_on >= f) & (t_on <= lst)
    window_reason = REASONS[-1].format(span_words(after_last).replace("'", "").replace(" time units", ""))
    reason = np.full(len(events), window_reason, dtype=object)
    flag = np.ones(len(events), dtype=bool)
    decided = np.zeros(len(events), dtype=bool)

    def rule(mask: np.ndarray, value: bool, text: str) -> None:
        hit = mask & ~decided
        flag[hit] = value
        reason[hit] = text
        decided[:] |= hit

    rule(~dosed, False, "no dosing")
    rule(on_missing, True, "onset unknown")
    rule(after, False, "after window")
    if severity is not None and prior is not None:
        sev, sev_missing, pri, pri_missing = _grades(events, severity, prior)
        pre = ~pri_missing
        rule(pre & sev_missing, True, "severity unknown")
        rule(pre & (sev > pri), True, "worsened after first dose")
        rule(pre, False, "pre-existing, not worsened")
    rule(before, False, "before first dose")
    rule(on, True, "on treatment")
    labels = [r for r in REASONS[:-1]] + [window_reason]
    out = events.copy()
    out[names[0]] = flag
    out[names[1]] = pd.Categorical(reason, categories=labels)
    return out


def _read(series: pd.Series, what: str) -> tuple[TimeAxis, np.ndarray]:
    try:
        ax, missing = TimeAxis.read(series)
    except TimeTypeError as err:
        raise TimeTypeError(f"{what}: {err}", column=str(series.name)) from None
    if ax.kind == "number" and missing.any():
        ax = TimeAxis(kind=ax.kind, column=ax.column, unit=ax.unit, res=ax.res, scale=ax.scale, tz=ax.tz,
                      t=np.where(missing, 0, ax.t).astype(ax.t.dtype))
    return ax, missing


def _subjects(events: pd.DataFrame, dosing: pd.DataFrame, ids: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Subject codes shared by the two tables (missing ids are errors)."""
    for frame, what in ((events, "events"), (dosing, "dosing")):
        nulls = np.zeros(len(frame), dtype=bool)
        for c in ids:
            nulls |= frame[c].isna().to_numpy()
        if nulls.any():
            where = np.flatnonzero(nulls)
            labels = list(frame.index[where[:5]])
            raise NullKeyError(rows_message(f"missing subject id in the {what} table", ids[0], len(where), labels,
                                            noun="row labels"), column=ids[0], count=len(where), ids=labels)
    codes: np.ndarray | None = None
    for c in ids:
        a, b = events[c], dosing[c]
        fa, fb = _family(a), _family(b)
        if "any" not in (fa, fb) and fa != fb and len(a) and len(b):
            raise ColumnTypeError(f"id column {c!r} holds {fa} in the events table but {fb} in the dosing table: "
                                  f"no subject could match", column=c, count=len(b))
        both = pd.concat([a, b], ignore_index=True) if a.dtype == b.dtype else \
            pd.Series(np.concatenate([a.to_numpy(dtype=object), b.to_numpy(dtype=object)]), dtype=object)
        k, uniq = pd.factorize(both, sort=False)
        k = k.astype(np.int64)
        codes = k if codes is None else pd.factorize(codes * (len(uniq) + 1) + k, sort=False)[0].astype(np.int64)
    assert codes is not None
    return codes[: len(events)], codes[len(events):]


def _grades(events: pd.DataFrame, severity: str, prior: str) -> tuple[np.ndarray, ...]:
    """Severity and prior severity as comparable numbers (codes of one ordered category, or numbers)."""
    a, b = events[severity], events[prior]
    cats = [isinstance(s.dtype, pd.CategoricalDtype) for s in (a, b)]
    if any(cats):
        if not all(cats) or not a.cat.ordered or not b.cat.ordered or \
                list(a.cat.categories) != list(b.cat.categories):
            raise ColumnTypeError(f"severity {severity!r} and prior {prior!r} must both be numbers or both ordered "
                                  f"categories with the same categories", column=severity)
        sa, sb = a.cat.codes.to_numpy(), b.cat.codes.to_numpy()
        return sa.astype(float), sa < 0, sb.astype(float), sb < 0
    fa, fb = to_float(a), to_float(b)
    return fa, np.isnan(fa), fb, np.isnan(fb)
