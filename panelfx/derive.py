"""``derive``: run transforms over one shared ordering of the panel."""

from __future__ import annotations

import bisect
import functools
import typing
from collections.abc import Mapping, Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd

from ._columns import Deferred
from ._frames import frames
from ._options import checked_options
from ._panel import Panel, as_id_list
from ._subset import after_panel
from ._tables import check_table_uses, side_tables
from ._threads import default_workers, run_all, using
from ._transform import Transform, check_choice
from .errors import ColumnExistsError, MissingColumnError, OptionError, PanelError

#: Values of ``derive(keep=)`` and ``derive(rows=)`` (also ``Derivation.apply``).
Keep = Literal["all", "new"]
Rows = Literal["input", "by_subject"]


def plan(
    columns: Sequence[str] | None, transforms: Sequence[Transform], id_cols: Sequence[str], time: str,
    tables: Mapping[str, Sequence[str]] | None = None,
) -> list[str]:
    """Check, before anything is computed, that every transform finds its inputs (in the
    frame or made by an earlier transform) and that no output overwrites a column.

    ``columns`` are the frame's columns; ``None`` when no frame is at hand yet (a saved
    derivation): inputs that no transform makes are then assumed to come from the frame.
    ``tables`` maps the side tables given to their columns: every table a transform reads
    must be there with the columns it reads (``None``: not checked, no tables at hand).
    Returns the output names in order.  An error's ``position`` is the 0-based index of
    the offending transform.
    """
    made: dict[str, int] = {}
    makers = _makers(transforms)
    for i, tr in enumerate(transforms):
        try:
            _plan_one(i, tr, transforms, made, columns, set(id_cols), time, makers)
            if tables is not None:
                check_table_uses(tr.tables(), tables, f"transform #{i + 1} ({tr.type_name})", id_cols)
        except PanelError as err:
            err.position = i  # type: ignore[attr-defined]
            raise
    return list(made)


def _makers(transforms: Sequence[Transform]) -> dict[str, list[int]]:
    """Output name -> positions of the transforms that make it, in order: one pass, so that
    finding \"made by a later transform\" does not rescan the list for every input (that was
    quadratic: 20,000 transforms took over a minute to load)."""
    makers: dict[str, list[int]] = {}
    for j, t in enumerate(transforms):
        if isinstance(t, Transform):
            for out in t.outputs():
                makers.setdefault(out, []).append(j)
    return makers


def _plan_one(i: int, tr: object, transforms: Sequence[Transform], made: dict[str, int],
              columns: Sequence[str] | None, ids: set[str], time: str, makers: dict[str, list[int]]) -> None:
    if not isinstance(tr, Transform):
        raise OptionError(
            f"transform #{i + 1} is a {type(tr).__name__}, not a panelfx transform "
            f"(build one with e.g. panelfx.baseline('col'))"
        )
    what = f"transform #{i + 1} ({tr.type_name})"
    for col in tr.inputs():
        if col in ids and col not in tr.groupings():
            raise OptionError(f"{what} uses the id column {col!r} as a value")
        if col == time or col in made or (columns is not None and col in columns) or col in tr.groupings():
            continue  # the time column may be read as a value (the previous visit's date, say)
        positions = makers.get(col, [])
        at = bisect.bisect_right(positions, i)
        later = [positions[at] + 1] if at < len(positions) else []  # the first later maker, numbered from 1
        if later:
            raise MissingColumnError(
                f"column {col!r} needed by {what} is made by a later transform "
                f"(#{later[0]}, {transforms[later[0] - 1].type_name}): reorder them",
                column=col, count=1,
            )
        if columns is not None:
            raise MissingColumnError(f"column {col!r} needed by {what} is not in the frame", column=col, count=1)
    for out in tr.outputs():
        if out in ids or out == time:
            source = "the id or time column"
        elif out in made:
            source = f"also made by transform #{made[out] + 1}"
        elif columns is not None and out in columns:
            source = "already in the frame"
        else:
            made[out] = i
            continue
        raise ColumnExistsError(f"output column {out!r} of {what} is {source}; choose another with name=",
                                column=out, count=1)


@checked_options
@frames(result="added", tables="tables")
def derive(
    frame: pd.DataFrame,
    *transforms: Transform,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    order: str | None = None,
    time_unit: str | None = None,
    tables: Mapping[str, pd.DataFrame] | None = None,
    threads: int | None = None,
    keep: Keep = "all",
    rows: Rows = "input",
) -> pd.DataFrame:
    """Add the derived columns of ``transforms`` to a copy of ``frame``.

    The result has every input column unchanged, then one column per output in the order
    the transforms were given, with the input's index and row order (even when the input
    is not sorted).  The input is never modified.  The panel is validated and ordered
    once for all transforms; input already grouped by subject and in time order is not
    re-sorted.  A transform may use a column made by an earlier one.

    ``id`` names the subject column, or several (e.g. ``["site", "subject"]``); ``time``
    the occasion time, numbers or datetimes (either may be an index level).  ``unit``
    (default ``"D"``, days, for datetimes) is the unit of derived durations, rates and
    areas; ``time_unit`` declares the unit of numeric times (``"D"`` for days since
    randomisation), after which ``unit`` converts them too and spans such as ``"30D"`` fit.

    Tied occasions: ``order`` names a column that orders rows sharing a subject and time (a
    dose record before the sample taken at the same time, say).  Rows then count as
    successive occasions in (time, order); a row never sees a tied row later in the order,
    so past-only transforms stay past-only; the gap between tied rows is 0 and a rate over
    it is missing.  (id, time, order) must be unique.  Physical row order never breaks a tie.

    ``tables`` names side tables (``{"labs": labs, "ex": dosing}``) for the transforms that
    read records beside the panel (:func:`~panelfx.as_of`, :func:`~panelfx.table_window`,
    :func:`~panelfx.exposure`); each carries the id columns under the same names, and is
    validated and ordered once for all transforms.

    ``threads``: the sort of the rows is split, and transforms that do not read each other's
    outputs run side by side, on this many threads.  Default: two for panels of a million
    rows or more when a core is free (the load average leaves one idle), else one; a second
    thread competing with other work on a busy machine was measured slower.  The results are
    the same bit for bit whatever the number.

    ``keep="new"`` returns the derived columns only (same index and rows; default ``"all"``).
    ``rows="by_subject"`` returns the rows grouped by subject, subjects in order of first
    appearance, each subject's rows in time order (then ``order``), index labels kept: what
    models with clusters read in row order need (statsmodels GEE's within-subject correlation).

    Warns with :class:`~panelfx.SubsetWarning` when the frame is visibly a panel with rows
    removed inside subjects (see README, "Derive on the whole panel, then split by subject").

    Raises :class:`~panelfx.PanelError` subclasses on bad input: a missing column, a
    missing id or time, duplicate (id, time), a time column of text, text where numbers
    are needed, or an output name that already exists.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [2, 1, 1], "day": [0, 7, 0], "hb": [13.1, 12.0, 12.5]},
    ...                   index=["r1", "r2", "r3"])
    >>> df.pipe(pfx.derive, pfx.lag("hb"), pfx.change_from_baseline("hb"), id="pid", time="day")
        pid  day    hb  hb_lag1  hb_change
    r1    2    0  13.1      NaN        0.0
    r2    1    7  12.0     12.5       -0.5
    r3    1    0  12.5      NaN        0.0
    """
    # the transform list and the options are checked before any O(n log n) work
    workers = _threads(threads, len(frame))
    check_choice("keep", keep, typing.get_args(Keep))
    check_choice("rows", rows, typing.get_args(Rows))
    names = plan(list(frame.columns), transforms, as_id_list(id), time, table_columns(tables))
    with using(workers):
        panel = Panel(frame, id=id, time=time, unit=unit, order=order, time_unit=time_unit)
        panel.tables = side_tables(panel, tables)
        after_panel(frame, panel)
        new = compute_all(panel, transforms, workers)
    if list(new) != names:  # pragma: no cover - plan() and compute_all() read the same outputs()
        raise PanelError(f"transforms made columns {list(new)}, expected {names}")
    # One concatenation (a column at a time fragments the frame).  The derived arrays are our
    # own, so they go in without a copy; the input's columns are copied by concat on pandas 2,
    # and shared copy-on-write on pandas 3: either way the input is never modified.
    arrays: dict[str, Any] = {}
    plain: list[np.ndarray] = []
    for k, v in new.items():  # two outputs never share memory (they go in without a copy)
        a = v.array
        if isinstance(v.dtype, np.dtype):
            raw = v.to_numpy()
            if any(np.may_share_memory(raw, other) for other in plain):
                a = raw.copy()
            plain.append(raw)
        arrays[k] = a
    added = pd.DataFrame(arrays, index=frame.index, copy=False)
    if keep == "new":
        out = added
    else:
        out = pd.concat([frame, added], axis=1) if new else frame.copy()
    perm = panel.ordering.order  # None when the rows already come by subject in time order
    if rows == "by_subject" and perm is not None:
        out = out.iloc[perm]
    return out




def table_columns(tables: Mapping[str, Any] | None) -> dict[str, list[str]]:
    """Names and columns of the side tables given (for :func:`plan`); checks it is a mapping."""
    if tables is None:
        return {}
    if not isinstance(tables, Mapping):
        raise OptionError(f"tables must be a mapping of names to data frames, e.g. {{'labs': labs}}, "
                          f"got {type(tables).__name__}")
    return {name: list(getattr(t, "columns", [])) for name, t in tables.items()}


def compute_all(panel: Panel, transforms: Sequence[Transform], threads: int | None = None) -> dict[str, pd.Series]:
    """Run the transforms on one panel; each output back in the caller's row order, as a Series.

    Transforms return sorted-order results: arrays, or a :class:`~panelfx._columns.Deferred`
    (a dtype-preserving take, values from a side table).  Each is put back in the caller's
    order here, once.  Transforms that do not read each other's outputs run side by side on
    ``threads`` threads (numpy releases the interpreter lock in its kernels); every transform
    is deterministic and independent of the others, so the results are the same bit for bit
    whatever the number of threads.
    """
    frame = panel.frame
    new: dict[str, pd.Series] = {}
    workers = _threads(threads, panel.n)
    for stage in _stages(transforms):
        if workers > 1 and len(stage) > 1:
            # the costliest first, so that the last one to start is a short one
            by_cost = sorted(stage, key=lambda i: -_COST.get(transforms[i].type_name, 1))
            with using(workers):
                results = run_all([functools.partial(_run_one, panel, transforms, i) for i in by_cost])
            made = dict(zip(by_cost, results))
            done = [made[i] for i in stage]
        else:
            done = [_run_one(panel, transforms, i) for i in stage]
        for outputs in done:  # registered in transform order, once the stage is complete
            for name, v in outputs:
                s = pd.Series(v, index=frame.index, name=name, copy=False)
                new[name] = s
                panel.columns.add(name, s)
    return {name: new[name] for tr in transforms for name in tr.outputs()}


def _run_one(panel: Panel, transforms: Sequence[Transform], i: int) -> list[tuple[str, Any]]:
    """Transform ``i`` computed and put back in the caller's order: (name, values) per output."""
    tr = transforms[i]
    values = tr.compute(panel)
    outputs = tr.outputs()
    if len(values) != len(outputs):
        raise PanelError(f"transform #{i + 1} ({tr.type_name}) returned {len(values)} arrays for "
                         f"{len(outputs)} outputs {list(outputs)}")
    done = []
    for name, v in zip(outputs, values):
        if isinstance(v, Deferred):  # a Take, or values from a side table
            v = v.resolve(panel)
        elif isinstance(v, pd.api.extensions.ExtensionArray):  # a categorical, say: keep its dtype
            v = v.take(panel.ordering.unsort(np.arange(len(v))))
        else:
            v = panel.ordering.unsort(np.asarray(v))
        done.append((name, v))
    return done


#: Rough relative cost of a transform type, only to start costly ones first on several threads.
_COST = {"rolling": 4, "table_window": 4, "exposure": 4, "as_of": 3, "cumulative": 2, "time_since": 2,
         "events_so_far": 2, "carry_forward": 2}


def _stages(transforms: Sequence[Transform]) -> list[list[int]]:
    """Transforms grouped so that each reads outputs of earlier stages only (in order within a stage)."""
    stage_of: dict[str, int] = {}
    stages: list[list[int]] = []
    for i, tr in enumerate(transforms):
        k = max((stage_of[c] + 1 for c in tr.inputs() if c in stage_of), default=0)
        if k == len(stages):
            stages.append([])
        stages[k].append(i)
        for out in tr.outputs():
            stage_of[out] = k
    return stages


def _threads(threads: int | None, rows: int = 0) -> int:
    """Threads to use: ``None`` for the default (two for large panels when a core is free,
    see :func:`panelfx._threads.default_workers`), else a positive integer."""
    if threads is None:
        return default_workers(rows)
    if isinstance(threads, bool) or not isinstance(threads, int) or threads < 1:
        raise OptionError(f"threads must be a positive integer or None, got {threads!r}")
    return threads


__all__ = ["derive"]
