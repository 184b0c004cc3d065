"""``snapshot``: features as of landmark times, one row per subject and landmark, nothing from after it."""

from __future__ import annotations

import inspect
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._clock import Clock, last_at_or_before
from ._panel import Panel, as_id_list, require_columns
from ._side import side_rows, side_time_column
from ._transform import Transform
from .derivation import Derivation
from .derive import derive, plan
from .errors import ColumnExistsError, NotConstantError, OptionError, rows_message

__all__ = ["snapshot"]


def snapshot(
    frame: pd.DataFrame,
    steps: Derivation | Transform | Sequence[Transform],
    *,
    at: str | Sequence[Any],
    id: str | Sequence[str] | None = None,
    time: str | None = None,
    unit: str | None = None,
    tables: Mapping[str, pd.DataFrame] | None = None,
    allow_future: bool = False,
    name: str = "landmark",
) -> pd.DataFrame:
    """For each subject and landmark time: the derived features as of that time, from rows at or before it.

    ``steps`` is a :class:`~panelfx.Derivation` (its ``id``, ``time`` and ``unit`` are
    used) or transforms (then ``id`` and ``time`` are required).  ``at`` is a column of
    the frame holding one landmark per subject (constant within subject; a subject whose
    landmark is missing gets no row), or a list of times given to every subject.

    The result is what this loop gives, without running it: for each subject and landmark
    L, keep the subject's rows with time at or before L (and the side tables' rows at or
    before L), derive, and keep the last row.  One row per subject and landmark, subjects
    in order of first appearance, landmarks in the order given: the id columns, the
    landmark (named like ``at``, or ``name`` for a list), then the frame's other columns
    and the derived ones, from the subject's last occasion at or before the landmark; all
    missing when the subject has no occasion by then (integers become floats there).

    Only past-only transforms are accepted: their value on the last occasion at or before
    L cannot depend on later rows, so the features are derived once on the whole frame and
    read at those occasions.  A transform that uses later occasions (a baseline chosen
    over the whole follow-up, a lead, a subject mean) is refused with an
    :class:`~panelfx.OptionError` unless ``allow_future=True``; then each (subject,
    landmark) gets its own copy of the rows up to L, and all copies are derived in one
    call (the rows made grow with the number of landmarks).  Neither path runs
    ``derive`` per subject.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 60, 0, 45],
    ...                    "sbp": [150.0, 140.0, 135.0, 128.0, 131.0]})
    >>> pfx.snapshot(df, [pfx.change_from_previous("sbp"), pfx.occasion()], at=[40, 90], id="pid", time="day")
       pid  landmark  day    sbp  sbp_diff  occasion
    0    1        40   30  140.0     -10.0         2
    1    1        90   60  135.0      -5.0         3
    2    2        40    0  128.0       NaN         1
    3    2        90   45  131.0       3.0         2
    """
    transforms, id_cols, time_col, unit = _steps(steps, id, time, unit)
    if not isinstance(frame, pd.DataFrame):
        raise TypeError(f"expected a pandas DataFrame, got {type(frame).__name__}")
    if not isinstance(allow_future, bool):
        raise OptionError(f"allow_future must be True or False, got {allow_future!r}")
    if not isinstance(name, str) or not name:
        raise OptionError(f"name must be a column name, got {name!r}")
    if tables is not None and "tables" not in inspect.signature(derive).parameters:
        raise OptionError("tables= needs side-table support in derive, which this panelfx does not have yet")
    plan(list(frame.columns), transforms, id_cols, time_col)  # the checks derive makes, before any work
    future = [f"#{i + 1} ({tr.type_name})" for i, tr in enumerate(transforms) if not tr.past_only]
    if future and not allow_future:
        raise OptionError(f"transform(s) {', '.join(future)} use later occasions (past_only is False), so their "
                          f"value as of a landmark depends on how the data are cut: pass allow_future=True to cut "
                          f"at each landmark and derive on the cut rows")

    at_col = at if isinstance(at, str) else None
    if at_col is not None:
        require_columns(frame, [at_col], "landmark (at=)")
        if at_col in (*id_cols, time_col):
            raise OptionError(f"at={at_col!r} is the id or time column")
        label = at_col
        given: list[Any] = []
    else:
        if isinstance(at, (Mapping, pd.DataFrame)) or not isinstance(at, (Sequence, np.ndarray, pd.Index,
                                                                          pd.Series)):
            raise OptionError(f"at must be a column name or a list of times, got {type(at).__name__}")
        given = list(at)
        if not given:
            raise OptionError("at must name at least one landmark time")
        label = name
        if label in frame.columns:
            raise ColumnExistsError(f"landmark column {label!r} is already in the frame; choose another with name=",
                                    column=label, count=1)

    panel = Panel(frame, id=id_cols, time=time_col, unit=unit)
    numbers = [v for v in given if isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)]
    clock = Clock.build(frame[time_col], columns=[frame[at_col]] if at_col else [], numbers=numbers)
    s = panel.subjects
    t = panel.sort(clock.read(frame[time_col])[0])

    # ---- (subject, landmark) pairs
    if at_col is not None:
        ticks, missing = clock.read(frame[at_col])
        ticks, missing = panel.sort(ticks), panel.sort(missing)
        first = s.starts
        differs = (missing != missing[first][s.grp]) | (~missing & (ticks != ticks[first][s.grp]))
        if differs.any():
            where = np.flatnonzero(differs)
            ids = panel.ids_at(where)
            raise NotConstantError(rows_message("the landmark must be constant within subject", at_col, len(where),
                                                ids), column=at_col, count=len(where), ids=ids)
        have = np.flatnonzero(~missing[first])
        p_grp, p_t = have, ticks[first][have]
        landmark = frame[at_col].take(panel.ordering.positions(first[have])).array
    else:
        lt = np.array([clock.point(v, "at") for v in given])
        if len(np.unique(lt)) != len(lt):
            raise OptionError(f"at lists a landmark time twice: {given!r}")
        p_grp = np.repeat(np.arange(s.count), len(lt))
        p_t = np.tile(lt, s.count)
        landmark = pd.Series(given * s.count).array if s.count else pd.Series(given[:0]).array
        if clock.kind != "number" or all(isinstance(v, (int, np.integer)) for v in given):
            landmark = pd.Series(list(landmark)).array  # one dtype for the column (datetimes, integers)
    last = last_at_or_before(s.grp, t, p_grp, p_t) if len(p_grp) else np.zeros(0, dtype=np.int64)

    # ---- the derived features at each pair's last occasion
    kwargs: dict[str, Any] = {} if tables is None else {"tables": tables}
    if not future:
        full = derive(frame, *transforms, id=id_cols, time=time_col, unit=unit, **kwargs)
        rows = np.where(last >= 0, panel.ordering.positions(np.maximum(last, 0)), -1)
    else:
        full, rows = _cut_and_derive(frame, panel, transforms, id_cols, time_col, unit, tables, clock, p_grp, p_t,
                                     last)
    first_pos = panel.ordering.positions(s.starts)
    out: dict[str, Any] = {c: frame[c].take(first_pos[p_grp]).array for c in id_cols}
    out[label] = landmark
    for c in full.columns:
        if c in out or c in id_cols:
            continue
        out[c] = pd.api.extensions.take(_values(full[c]), rows, allow_fill=True)
    return pd.DataFrame(out)


def _values(s: pd.Series) -> Any:
    # numpy-backed columns as ndarrays (pandas 2.2 warns when take gets a NumpyExtensionArray)
    return s.to_numpy() if isinstance(s.dtype, np.dtype) else s.array


def _steps(steps: Any, id: Any, time: Any, unit: Any) -> tuple[list[Transform], list[str], str, str | None]:
    if isinstance(steps, Derivation):
        clashes = [(what, mine, theirs) for what, mine, theirs in
                   (("id", None if id is None else as_id_list(id), steps.id_cols), ("time", time, steps.time),
                    ("unit", unit, steps.unit)) if mine is not None and mine != theirs]
        if clashes:
            what, mine, theirs = clashes[0]
            raise OptionError(f"{what}={mine!r} differs from the derivation's {what}={theirs!r}")
        return list(steps.transforms), steps.id_cols, steps.time, steps.unit
    transforms = [steps] if isinstance(steps, Transform) else list(steps)
    if id is None or time is None:
        raise OptionError("give id= and time= (or a Derivation, which holds them)")
    if not isinstance(time, str):
        raise OptionError(f"time must be a column name, got {time!r}")
    return transforms, as_id_list(id), time, unit


def _free_name(columns: Sequence[Any], base: str) -> str:
    name = base
    while name in columns:
        name += "_"
    return name


def _cut_and_derive(frame: pd.DataFrame, panel: Panel, transforms: list[Transform], id_cols: list[str],
                    time_col: str, unit: str | None, tables: Mapping[str, pd.DataFrame] | None, clock: Clock,
                    p_grp: np.ndarray, p_t: np.ndarray, last: np.ndarray) -> tuple[pd.DataFrame, np.ndarray]:
    """Every (subject, landmark) pair as a subject of its own holding the rows up to its landmark;
    all derived in one call.  Returns the derived copies and, per pair, the copy's last row (-1: none)."""
    s = panel.subjects
    start = s.starts[p_grp]
    count = np.where(last >= 0, last - start + 1, 0)
    pair = np.repeat(np.arange(len(p_grp)), count)
    sorted_rows = np.repeat(start, count) + (np.arange(int(count.sum())) - np.repeat(np.cumsum(count) - count, count))
    key = _free_name(list(frame.columns), "_landmark_pair")
    cut = frame.iloc[panel.ordering.positions(sorted_rows)].reset_index(drop=True)
    cut.insert(0, key, pair)
    kwargs: dict[str, Any] = {}
    if tables is not None:
        kwargs["tables"] = {nm: _cut_table(tab, nm, frame, id_cols, time_col, clock, s.count, p_grp, p_t, key)
                            for nm, tab in tables.items()}
    full = derive(cut, *transforms, id=key, time=time_col, unit=unit, **kwargs)
    ends = np.cumsum(count) - 1
    return full.drop(columns=[key]), np.where(count > 0, ends, -1)


def _cut_table(table: pd.DataFrame, nm: str, frame: pd.DataFrame, id_cols: list[str], time_col: str, clock: Clock,
               n_subjects: int, p_grp: np.ndarray, p_t: np.ndarray, key: str) -> pd.DataFrame:
    """A side table's rows at or before each pair's landmark, one copy per pair, keyed by the pair."""
    tcol = side_time_column(table, id_cols, time_col, f"table {nm!r}")
    rows = side_rows(table, tcol, frame, id_cols, n_subjects, clock, f"table {nm!r}", unique=False)
    # pairs are in subject order; each pair takes its subject's table rows up to the landmark
    first = np.searchsorted(rows.grp, p_grp, side="left")
    upto = last_at_or_before(rows.grp, rows.t, p_grp, p_t)
    count = np.where(upto >= 0, upto - first + 1, 0)
    pair = np.repeat(np.arange(len(p_grp)), count)
    taken = np.repeat(first, count) + (np.arange(int(count.sum())) - np.repeat(np.cumsum(count) - count, count))
    out = table.iloc[rows.pos[taken]].reset_index(drop=True)
    out.insert(0, key, pair)
    return out
