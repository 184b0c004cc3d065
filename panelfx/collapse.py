"""``collapse_ties``: one row per (subject, time), combining tied rows by stated rules."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Literal

import numpy as np
import pandas as pd

from ._frames import frames
from ._options import checked_options
from ._panel import Panel, key_column
from .errors import ColumnExistsError, ConflictingTiesError, OptionError, rows_message

Rule = Literal["mean", "median", "min", "max", "sum", "count", "first", "last", "all_equal"]
RULES: tuple[str, ...] = ("mean", "median", "min", "max", "sum", "count", "first", "last", "all_equal")

#: Columns added to the result: rows combined into each row, and their labels (audit).
COUNT_COLUMN = "rows_combined"
LABELS_COLUMN = "source_rows"


@checked_options
@frames()
def collapse_ties(
    frame: pd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    rules: Mapping[str, Rule] | None = None,
    order: str | None = None,
) -> pd.DataFrame:
    """One row per (subject, time): rows sharing a subject and time are combined; others pass through.

    Each column is combined by its rule in ``rules``: ``"mean"``, ``"median"``, ``"min"``,
    ``"max"``, ``"sum"`` (of the present values; missing when none is present, 0 for a sum),
    ``"count"`` (present values), ``"first"`` / ``"last"`` (the value of the first / last
    tied row in the ``order`` column, missing or not; they need ``order=``), or
    ``"all_equal"`` (the default for every column without a rule): tied rows must agree
    (missing agrees only with missing), else a :class:`~panelfx.errors.ConflictingTiesError`
    lists the subjects, so nothing is dropped silently.

    Rows that are not tied come out unchanged, with their labels.  A combined row keeps the
    label of its earliest row in the input.  Rows keep the input's order (a combined row
    where its earliest row stood).  Two columns are added: ``rows_combined`` (1 for rows
    that were not tied) and ``source_rows`` (the labels of the combined rows, as a tuple;
    missing for rows that were not tied; listed in ``order``, else in input order).  Physical
    row order never decides a value.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2], "day": [0, 0, 7, 0],
    ...                    "glucose": [5.0, 6.0, 5.5, 7.0], "site": ["A", "A", "A", "B"]},
    ...                   index=["r1", "r2", "r3", "r4"])
    >>> pfx.collapse_ties(df, id="pid", time="day", rules={"glucose": "mean"})
        pid  day  glucose site  rows_combined source_rows
    r1    1    0      5.5    A              2    (r1, r2)
    r3    1    7      5.5    A              1        None
    r4    2    0      7.0    B              1        None
    """
    panel = Panel(frame, id=id, time=time, order=order, strict=False)
    rules = dict(rules or {})
    _check_rules(frame, panel, rules, order)
    for added in (COUNT_COLUMN, LABELS_COLUMN):
        if added in frame.columns:
            raise ColumnExistsError(f"collapse_ties adds column {added!r}, which is already in the frame",
                                    column=added, count=1)
    if order is not None and panel.repeated.any() and any(r in ("first", "last") for r in rules.values()):
        where = np.flatnonzero(panel.repeated)
        ids = panel.ids_at(where)
        raise OptionError(rows_message(f"rows tied in time and in {order!r}: 'first'/'last' would depend on "
                                       f"physical row order", order, len(where), ids))

    n = panel.n
    pos = panel.ordering.positions(np.arange(n))  # caller position of each sorted row
    new_group = ~panel.tied
    group = np.cumsum(new_group) - 1  # (subject, time) group of each sorted row
    starts = np.flatnonzero(new_group)
    size = np.diff(np.append(starts, n))
    keep = np.minimum.reduceat(pos, starts) if n else np.zeros(0, dtype=np.int64)  # earliest row
    by_caller = np.argsort(keep, kind="stable")
    out = frame.iloc[keep[by_caller]].copy()
    combined = size[by_caller] > 1
    sorted_frame = frame.iloc[pos]
    multi = size > 1

    for col in frame.columns:
        if col in (*panel.id_cols, time, order) or not multi.any():
            continue
        rule = rules.get(col, "all_equal")
        values = sorted_frame[col]
        if rule == "all_equal":
            _check_agree(panel, values, group, starts, size, col)
            continue
        if rule in ("first", "last"):
            at = starts if rule == "first" else starts + size - 1
            picked = values.iloc[at[by_caller]]
            out[col] = _assign(out[col], combined, picked.to_numpy())
            continue
        agg = values.groupby(group, sort=True).agg(rule)  # built-in reductions, vectorised
        if rule == "count":
            out[col] = np.where(combined, agg.to_numpy()[by_caller], values.notna().to_numpy()[starts][by_caller])
            continue
        out[col] = _assign(out[col], combined, agg.to_numpy()[by_caller])

    out[COUNT_COLUMN] = size[by_caller].astype(np.int64)
    labels = pd.Series(np.asarray(frame.index, dtype=object)[pos])
    tied_rows = multi[group]
    audit = np.full(len(out), None, dtype=object)
    if tied_rows.any():
        # labels of the combined groups only (usually few), indexed by group number
        sets = labels[tied_rows].groupby(group[tied_rows], sort=True).agg(tuple)
        audit[combined] = sets.loc[by_caller[combined]].to_numpy()
    out[LABELS_COLUMN] = audit
    return out


def _assign(current: pd.Series, mask: np.ndarray, values: np.ndarray) -> pd.Series:
    """``current`` with ``values`` where ``mask`` (combined rows); the dtype widens if it must."""
    if not mask.any():
        return current
    base = current.to_numpy(dtype=object) if current.dtype == object else current.to_numpy()
    try:
        merged = np.where(mask, values, base)
    except (TypeError, ValueError):
        merged = np.where(mask, values.astype(object), base.astype(object))
    return pd.Series(merged, index=current.index, name=current.name)


def _check_agree(panel: Panel, values: pd.Series, group: np.ndarray, starts: np.ndarray, size: np.ndarray,
                 col: str) -> None:
    """Tied rows must hold one value (missing equals missing), else a typed error with the subjects."""
    first = values.iloc[starts[group]].reset_index(drop=True)
    v = values.reset_index(drop=True)
    same = (v == first) | (v.isna() & first.isna())
    bad = ~same.to_numpy(dtype=bool, na_value=False)
    if bad.any():
        where = np.flatnonzero(bad)
        ids = panel.ids_at(where)
        raise ConflictingTiesError(
            rows_message(f"tied rows (same subject and time) disagree on {col!r}; give a rule for it "
                         f"(e.g. rules={{{col!r}: 'mean'}}) or fix the data", col, len(where), ids),
            column=col, count=len(where), ids=ids)


def _check_rules(frame: pd.DataFrame, panel: Panel, rules: Mapping[str, str], order: str | None) -> None:
    keys = {*panel.id_cols, panel.time_col, *([order] if order else [])}
    for col, rule in rules.items():
        if col not in frame.columns:
            raise OptionError(f"rules names column {col!r}, which is not in the frame")
        if col in keys:
            raise OptionError(f"rules names the key column {col!r}: keys are not combined")
        if rule not in RULES:
            raise OptionError(f"rule for {col!r} must be one of {list(RULES)}, got {rule!r}")
        if rule in ("first", "last") and order is None:
            raise OptionError(f"rule {rule!r} for {col!r} needs order= (a column that orders tied rows): "
                              f"physical row order never decides")
    if order is not None:
        key_column(frame, order)


__all__ = ["collapse_ties"]
