"""``snapshot``: features as of landmark times, one row per subject and landmark, nothing from after it."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._clock import Clock, last_at_or_before
from ._frames import frames
from ._options import checked_options
from ._panel import Panel, as_id_list, require_columns
from ._tables import SideTable
from ._transform import Transform
from .derivation import Derivation
from .derive import derive, plan, table_columns
from .errors import ColumnExistsError, NotConstantError, OptionError, rows_message

__all__ = ["snapshot"]


@checked_options
@frames(tables="tables")
def snapshot(
    frame: pd.DataFrame,
    steps: Derivation | Transform | Sequence[Transform],
    *,
    at: str | Sequence[Any],
    id: str | Sequence[str] | None = None,
    time: str | None = None,
    unit: str | None = None,
    order: str | None = None,
    time_unit: str | None = None,
    tables: Mapping[str, pd.DataFrame] | None = None,
    allow_future: bool = False,
    name: str = "landmark",
) -> pd.DataFrame:
    """For each subject and landmark time: the derived features as of that time, from rows at or before it.

    ``steps`` is a :class:`~panelfx.Derivation` (its ``id``, ``time``, ``unit``, ``order``
    and ``time_unit`` are used) or transforms (then ``id`` and ``time`` are required;
    ``unit``, ``order``, ``time_unit`` and ``tables`` as in :func:`~panelfx.derive`).  ``at`` is a column of
    the frame holding one landmark per subject (constant within subject; a subject whose
    landmark is missing gets no row), or a list of times given to every subject.

    The result is what this loop gives, without running it: for each subject and landmark
    L, keep the subject's rows with time at or before L (and the side-table records whose
    times, as the transforms read them, are at or before L, with end times beyond L brought
    back to L, as :func:`~panelfx.testing.assert_past_only` cuts them), derive, and keep the
    last row (the last in (time, ``order``) among tied rows).  One row per subject and landmark, subjects
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
    transforms, id_cols, time_col, keys = _steps(steps, id, time, {"unit": unit, "order": order,
                                                                   "time_unit": time_unit})
    if not isinstance(allow_future, bool):
        raise OptionError(f"allow_future must be True or False, got {allow_future!r}")
    if not isinstance(name, str) or not name:
        raise OptionError(f"name must be a column name, got {name!r}")
    plan(list(frame.columns), transforms, id_cols, time_col, table_columns(tables))  # derive's checks, first
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

    panel = Panel(frame, id=id_cols, time=time_col, unit=keys["unit"], order=keys["order"],
                  time_unit=keys["time_unit"])
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
    if not future:
        full = derive(frame, *transforms, id=id_cols, time=time_col, tables=tables, **keys)
        rows = np.where(last >= 0, panel.ordering.positions(np.maximum(last, 0)), -1)
    else:
        lm_values = pd.Series(landmark)
        full, rows = _cut_and_derive(frame, panel, transforms, time_col, keys, tables, p_grp, lm_values, last)
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


def _steps(steps: Any, id: Any, time: Any, keys: dict[str, Any]
           ) -> tuple[list[Transform], list[str], str, dict[str, Any]]:
    if isinstance(steps, Derivation):
        theirs = {"id": steps.id_cols, "time": steps.time, "unit": steps.unit, "order": steps.order,
                  "time_unit": steps.time_unit}
        mine = {"id": None if id is None else as_id_list(id), "time": time, **keys}
        clashes = [k for k, v in mine.items() if v is not None and v != theirs[k]]
        if clashes:
            k = clashes[0]
            raise OptionError(f"{k}={mine[k]!r} differs from the derivation's {k}={theirs[k]!r}")
        return list(steps.transforms), steps.id_cols, steps.time, {k: theirs[k] for k in keys}
    transforms = [steps] if isinstance(steps, Transform) else list(steps)
    if id is None or time is None:
        raise OptionError("give id= and time= (or a Derivation, which holds them)")
    if not isinstance(time, str):
        raise OptionError(f"time must be a column name, got {time!r}")
    return transforms, as_id_list(id), time, keys


def _free_name(columns: Sequence[Any], base: str) -> str:
    name = base
    while name in columns:
        name += "_"
    return name


def _cut_and_derive(frame: pd.DataFrame, panel: Panel, transforms: list[Transform], time_col: str,
                    keys: dict[str, Any], tables: Mapping[str, pd.DataFrame] | None, p_grp: np.ndarray,
                    landmark: pd.Series, last: np.ndarray) -> tuple[pd.DataFrame, np.ndarray]:
    """Every (subject, landmark) pair as a subject of its own holding the rows up to its landmark;
    all derived in one call.  Returns the derived copies and, per pair, the copy's last row (-1: none)."""
    s = panel.subjects
    start = s.starts[p_grp]
    count = np.where(last >= 0, last - start + 1, 0)
    pair = np.repeat(np.arange(len(p_grp)), count)
    key = _free_name([*frame.columns, *(c for t in (tables or {}).values() for c in t.columns)], "_landmark_pair")
    cut = frame.iloc[panel.ordering.positions(_ranges(start, count))].reset_index(drop=True)
    cut.insert(0, key, pair)
    cut_tables = None
    if tables is not None:
        cut_tables = {nm: _cut_table(tab, nm, transforms, panel, p_grp, landmark, key) for nm, tab in tables.items()}
    full = derive(cut, *transforms, id=key, time=time_col, tables=cut_tables, **keys)
    ends = np.cumsum(count) - 1
    return full.drop(columns=[key]), np.where(count > 0, ends, -1)


def _ranges(start: np.ndarray, count: np.ndarray) -> np.ndarray:
    """start[i], start[i] + 1, ..., start[i] + count[i] - 1 for every i, concatenated."""
    return np.repeat(start, count) + (np.arange(int(count.sum())) - np.repeat(np.cumsum(count) - count, count))


def _cut_table(table: pd.DataFrame, name: str, transforms: list[Transform], panel: Panel, p_grp: np.ndarray,
               landmark: pd.Series, key: str) -> pd.DataFrame:
    """A side table, one copy of each subject's records per (subject, landmark) pair, keyed by the
    pair: records whose time (every time column the transforms order it by) is after the landmark
    are removed, end times after it brought back to it (the cut of assert_past_only)."""
    psub = SideTable(name, table, panel).psub  # panel subject of each record, -1 when absent
    known = np.flatnonzero(psub >= 0)
    by_subject = known[np.argsort(psub[known], kind="stable")]
    n_rec = np.bincount(psub[known], minlength=panel.subjects.count)
    first = np.cumsum(n_rec) - n_rec
    count = n_rec[p_grp]
    records = by_subject[_ranges(first[p_grp], count)]
    pair = np.repeat(np.arange(len(p_grp)), count)
    out = table.iloc[records].reset_index(drop=True)
    cut_at = landmark.take(pair).reset_index(drop=True)
    uses = [u for tr in transforms for u in tr.tables() if u.name == name]
    drop = np.zeros(len(out), dtype=bool)
    for col in dict.fromkeys(u.time for u in uses):
        drop |= (out[col] > cut_at).fillna(False).to_numpy(dtype=bool)
    keep = np.flatnonzero(~drop)
    out, cut_at = out.iloc[keep].reset_index(drop=True), cut_at.iloc[keep].reset_index(drop=True)
    for col in dict.fromkeys(e for u in uses for e in u.ends):
        late = (out[col] > cut_at).fillna(False).to_numpy(dtype=bool)
        if late.any():
            out[col] = out[col].where(~late, cut_at)
    out.insert(0, key, pair[keep])
    return out
