"""panelfx on Dask: the same derived variables on a partitioned frame, subject by subject.

Every transform reads only its own subject's rows, so a panel partitions perfectly: put
each subject's rows in one partition and run panelfx's own engine on each.  The results
equal single-process :func:`panelfx.derive` exactly, value for value (the engine's results
do not depend on row order or on the other subjects).  Needs ``pip install 'panelfx[dask]'``.

- :func:`derive` / :func:`apply` (also ``Derivation.apply`` given a dask frame): the
  derived columns, lazily, as a dask DataFrame;
- :func:`subject_summary`, :func:`check`, :func:`collapse_ties`, :func:`visit_grid`,
  :func:`episodes`: the frame-level functions per partition;
- :func:`map_subjects`: any function of a frame of whole subjects, per partition.

Partitions: by default rows are shuffled by a stable hash of the (possibly composite) id
(Dask's own shuffle), into ``npartitions`` (default: as many as the input).  With
``whole_subjects=True`` the caller declares that each partition already holds whole
subjects: there is no shuffle, the order, index and divisions are kept, and the
declaration is verified cheaply (each partition reports the hashes of its subjects; a
subject seen in two partitions raises :class:`~panelfx.errors.SplitSubjectError` naming
example ids, or, with ``if_split="shuffle"``, the frame is shuffled instead).

Rows and index: results keep the caller's index values.  After a shuffle the rows come
grouped by subject hash, in no documented order within a partition; ``row_order="input"``
puts them back in the caller's partitions, order and divisions (each row carries its
number through the work: one more shuffle).  Side tables (``tables=``) are partitioned by
the same hash, so each partition meets only its own subjects' records.

Meta: the result's names and dtypes are predicted from the input's schema and the
transforms without reading data (see :mod:`panelfx._schema`): bad options and missing
columns fail at once.  A column copied from an integer or boolean column (``lag``,
``baseline``, ``carry_forward``) is float64 / object, as it is in pandas whenever a value
is missing; use a nullable dtype (``Int64``, ``boolean``) to keep it.

Progress: the work runs as Dask tasks named ``panelfx-*``: wrap ``compute()`` in
``dask.diagnostics.ProgressBar()`` locally, or watch the dashboard of a
``distributed.Client``.

>>> import dask.dataframe as dd, pandas as pd, panelfx as pfx, panelfx.dask
>>> df = pd.DataFrame({"pid": [1, 2, 1, 2, 3], "day": [0, 0, 7, 14, 0],
...                    "hb": [12.5, 13.1, 12.0, 13.4, 11.8]})
>>> ddf = dd.from_pandas(df, npartitions=2)
>>> out = pfx.dask.derive(ddf, pfx.lag("hb"), pfx.change_from_baseline("hb"), id="pid", time="day")
>>> out.compute().sort_index()
   pid  day    hb  hb_lag1  hb_change
0    1    0  12.5      NaN        0.0
1    2    0  13.1      NaN        0.0
2    1    7  12.0     12.5       -0.5
3    2   14  13.4     13.1        0.3
4    3    0  11.8      NaN        0.0
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any, Literal

from ..errors import MissingDependencyError

try:
    import dask.dataframe as dd
except ImportError as err:
    raise MissingDependencyError("panelfx.dask needs Dask: pip install 'panelfx[dask]'", extra="dask") from err
import pandas as pd

from .._panel import as_id_list
from .._schema import predict_outputs, widen
from .._transform import Transform
from ..derivation import Derivation
from ..errors import OptionError, SplitSubjectError
from ._layout import HASH, ROW, arrange, restore_order
from ._run import Call, check_part, derive_spec, run_partition

__all__ = ["derive", "apply", "map_subjects", "subject_summary", "check", "collapse_ties", "visit_grid", "episodes",
           "SplitSubjectError"]


def derive(
    ddf: dd.DataFrame,
    *transforms: Transform,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    order: str | None = None,
    time_unit: str | None = None,
    tables: Mapping[str, Any] | None = None,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
    row_order: Literal["any", "input"] = "any",
) -> dd.DataFrame:
    """:func:`panelfx.derive` on a dask DataFrame, lazily: a dask DataFrame with the derived columns.

    ``id``, ``time``, ``unit``, ``order``, ``time_unit`` and the transforms are those of
    :func:`panelfx.derive`; ``tables`` (side tables by name, pandas or dask frames with the
    id columns) are partitioned alongside the frame, so each partition meets only its own
    subjects' records.  ``whole_subjects``, ``if_split``, ``npartitions`` and ``row_order``
    say how the rows are partitioned and returned (see the module docstring).  Nothing is
    computed here: the output's names and dtypes are predicted, and errors in the data (a
    missing time, duplicate occasions) are raised by ``compute()``, naming the partition
    whose rows they count.

    >>> import dask.dataframe as dd, pandas as pd, panelfx as pfx, panelfx.dask
    >>> df = pd.DataFrame({"pid": ["a", "a", "b", "b"], "day": [0, 30, 0, 28], "kg": [80.0, 78.5, 91.0, 90.0]},
    ...                   index=[10, 11, 12, 13])
    >>> out = pfx.dask.derive(dd.from_pandas(df, npartitions=2), pfx.baseline("kg"), id="pid", time="day",
    ...                       row_order="input")
    >>> out.dtypes["kg_baseline"], out.npartitions
    (dtype('float64'), 2)
    >>> out.compute()
       pid  day    kg  kg_baseline
    10   a    0  80.0         80.0
    11   a   30  78.5         80.0
    12   b    0  91.0         91.0
    13   b   28  90.0         91.0
    """
    spec = Derivation(*transforms, id=id, time=time, unit=unit, order=order, time_unit=time_unit)
    return apply(spec, ddf, tables=tables, whole_subjects=whole_subjects, if_split=if_split,
                 npartitions=npartitions, row_order=row_order)


def apply(
    derivation: Derivation,
    ddf: dd.DataFrame,
    *,
    tables: Mapping[str, Any] | None = None,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
    row_order: Literal["any", "input"] = "any",
) -> dd.DataFrame:
    """A saved :class:`~panelfx.Derivation` applied to a dask DataFrame (as :func:`derive`).

    The derivation travels to the workers as its plain JSON and is parsed once per worker
    process."""
    if not isinstance(derivation, Derivation):
        raise OptionError(f"expected a panelfx.Derivation, got {type(derivation).__name__}")
    if row_order not in ("any", "input"):
        raise OptionError(f"row_order must be 'any' or 'input', got {row_order!r}")
    if not isinstance(ddf, dd.DataFrame):
        raise TypeError(f"expected a dask DataFrame, got {type(ddf).__name__}")
    if tables is not None and not isinstance(tables, Mapping):
        raise OptionError(f"tables must be a mapping of names to data frames, got {type(tables).__name__}")
    d = derivation
    # Predict the output schema first: bad options and missing columns fail before any work.
    table_metas = {k: (t._meta if isinstance(t, dd.DataFrame) else t.iloc[:0]) for k, t in (tables or {}).items()}
    predicted = predict_outputs(ddf._meta, d.transforms, d.id_cols, d.time, d.unit, order=d.order,
                                time_unit=d.time_unit, tables=table_metas)
    layout = arrange(ddf, d.id_cols, whole_subjects=whole_subjects, if_split=if_split, npartitions=npartitions,
                     rows=row_order == "input", tables=tables)
    keep_row = row_order == "input" and layout.shuffled
    meta = ddf._meta.copy()
    for name, dtype in predicted.items():
        meta[name] = pd.Series(pd.array([], dtype=dtype), index=meta.index)
    if keep_row:
        meta[ROW] = pd.Series([], dtype="int64", index=meta.index)
    out = _map(layout, derive_spec, (), {"spec": d.to_json()}, meta, keep_row, "panelfx-derive")
    return restore_order(out, ddf) if keep_row else out


def map_subjects(
    ddf: dd.DataFrame,
    func: Callable[..., pd.DataFrame],
    *args: Any,
    id: str | Sequence[str],
    meta: pd.DataFrame | None = None,
    tables: Mapping[str, Any] | None = None,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
    **kwargs: Any,
) -> dd.DataFrame:
    """``func(frame, *args, id=id, **kwargs)`` on each partition, every partition holding whole subjects.

    For functions of a frame that need all of a subject's rows and no other subject's (a
    per-subject summary, a structure check, collapsing tied rows, a visit grid).  With
    ``tables`` each call also gets ``tables={name: the partition's records}``.  ``meta``
    (an empty frame with the result's columns and dtypes) is predicted by calling ``func``
    on the input's empty meta when not given; each partition's result is held to it.
    The result's index is each partition's own (e.g. 0, 1, ... per partition).

    >>> import dask.dataframe as dd, pandas as pd, panelfx.dask
    >>> df = pd.DataFrame({"pid": [1, 1, 2, 2, 2], "day": [0, 5, 0, 3, 9]})
    >>> def last_visit(frame, id):
    ...     return frame.groupby(id, as_index=False)["day"].max()
    >>> out = panelfx.dask.map_subjects(dd.from_pandas(df, npartitions=2), last_visit, id="pid")
    >>> out.compute().sort_values("pid").reset_index(drop=True)
       pid  day
    0    1    5
    1    2    9
    """
    return _map_subjects(ddf, func, args, id=id, meta=meta, tables=tables, whole_subjects=whole_subjects,
                         if_split=if_split, npartitions=npartitions, kwargs=kwargs, widen_meta=False)


def _map_subjects(ddf: dd.DataFrame, func: Callable[..., pd.DataFrame], args: Sequence[Any], *,
                  id: str | Sequence[str], meta: pd.DataFrame | None, tables: Mapping[str, Any] | None,
                  whole_subjects: bool, if_split: str, npartitions: int | None, kwargs: Mapping[str, Any],
                  widen_meta: bool) -> dd.DataFrame:
    """:func:`map_subjects`; ``widen_meta`` makes a predicted meta's integer and boolean columns
    nullable (for functions whose integer columns gain missing values in some partitions)."""
    id_value: Any = id if isinstance(id, str) else list(as_id_list(id))
    layout = arrange(ddf, as_id_list(id), whole_subjects=whole_subjects, if_split=if_split,
                     npartitions=npartitions, rows=False, tables=tables)
    kwargs = {"id": id_value, **kwargs}
    if meta is None:
        extra = {"tables": {k: t._meta.drop(columns=[HASH]) for k, t in layout.tables.items()}} if tables else {}
        meta = func(ddf._meta, *args, **kwargs, **extra)
        if widen_meta:
            meta = widen(meta)
    name = getattr(func, "__name__", "func")
    return _map(layout, func, args, kwargs, meta, False, f"panelfx-{name}")


def subject_summary(
    ddf: dd.DataFrame,
    cols: str | Sequence[str],
    *,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
) -> dd.DataFrame:
    """:func:`panelfx.subject_summary` on a dask DataFrame: one row per subject.

    Subjects come partition by partition, in order of first appearance within each; the
    index is each partition's own 0, 1, ...  Sort by the id for a stable order.

    >>> import dask.dataframe as dd, pandas as pd, panelfx.dask
    >>> df = pd.DataFrame({"pid": [1, 2, 1, 2], "day": [0, 0, 10, 5], "hb": [12.0, 11.0, 13.0, None]})
    >>> out = panelfx.dask.subject_summary(dd.from_pandas(df, npartitions=2), "hb", id="pid", time="day")
    >>> out.compute().sort_values("pid")[["pid", "n_occasions", "hb_n", "hb_slope"]].reset_index(drop=True)
       pid  n_occasions  hb_n  hb_slope
    0    1            2     2       0.1
    1    2            2     1       NaN
    """
    from ..summary import subject_summary as one

    return map_subjects(ddf, one, cols, id=id, time=time, unit=unit, whole_subjects=whole_subjects,
                        if_split=if_split, npartitions=npartitions)


def check(
    ddf: dd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    spacing: Any = None,
    tolerance: Any = None,
    notes: bool = False,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
) -> dd.DataFrame:
    """:func:`panelfx.check` on a dask DataFrame: the findings of every partition.

    The same findings as on the whole frame (``row`` is the caller's row label), except
    the ``not_in_order`` note, which has no meaning for a partitioned frame.  Findings come
    partition by partition, sorted by problem within each; the index is each partition's
    own.

    >>> import dask.dataframe as dd, pandas as pd, panelfx.dask
    >>> df = pd.DataFrame({"pid": [1, 1, 2, 2], "day": [0, 0, 0, 30]}, index=[10, 11, 12, 13])
    >>> report = panelfx.dask.check(dd.from_pandas(df, npartitions=2), id="pid", time="day").compute()
    >>> report[["problem", "id", "row"]].reset_index(drop=True)
         problem  id  row
    0  duplicate   1   10
    1  duplicate   1   11
    """
    return map_subjects(ddf, check_part, id=id, time=time, spacing=spacing, tolerance=tolerance, notes=notes,
                        whole_subjects=whole_subjects, if_split=if_split, npartitions=npartitions)


def collapse_ties(
    ddf: dd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
    **options: Any,
) -> dd.DataFrame:
    """:func:`panelfx.collapse_ties` on a dask DataFrame (``rules=``, ``order=`` as there), per partition.

    The same rows and values as on the whole frame; ``source_rows`` lists the combined rows'
    labels in the order the rows sit in their partition (after a shuffle, not the caller's)."""
    from ..collapse import collapse_ties as one

    return _map_subjects(ddf, one, (), id=id, meta=None, tables=None, whole_subjects=whole_subjects,
                         if_split=if_split, npartitions=npartitions, kwargs={"time": time, **options},
                         widen_meta=True)


def visit_grid(
    ddf: dd.DataFrame,
    windows: Any,
    *,
    id: str | Sequence[str],
    time: str,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
    **options: Any,
) -> dd.DataFrame:
    """:func:`panelfx.visit_grid` on a dask DataFrame (``pick=``, ``day=``, ``until=`` as there), per partition."""
    from ..visit_grid import visit_grid as one

    return _map_subjects(ddf, one, (windows,), id=id, meta=None, tables=None, whole_subjects=whole_subjects,
                         if_split=if_split, npartitions=npartitions, kwargs={"time": time, **options},
                         widen_meta=True)


#: Name under which an events table travels with the other side tables.
_EVENTS = "__panelfx_events"


def episodes(
    ddf: dd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    events: Any = None,
    tables: Mapping[str, Any] | None = None,
    whole_subjects: bool = False,
    if_split: Literal["raise", "shuffle"] = "raise",
    npartitions: int | None = None,
    **options: Any,
) -> dd.DataFrame:
    """:func:`panelfx.episodes` on a dask DataFrame, per partition.  ``events`` (a column name,
    or a table of event times, pandas or dask) and ``tables`` are partitioned with the frame."""
    tabs = dict(tables or {})
    table_events = isinstance(events, (pd.DataFrame, dd.DataFrame))
    if table_events:
        tabs[_EVENTS] = events
    kwargs = {"time": time, "events": None if table_events else events, "events_table": table_events, **options}
    return _map_subjects(ddf, _episodes_part, (), id=id, meta=None, tables=tabs or None,
                         whole_subjects=whole_subjects, if_split=if_split, npartitions=npartitions, kwargs=kwargs,
                         widen_meta=True)


def _episodes_part(frame: pd.DataFrame, *, events_table: bool, tables: Mapping[str, pd.DataFrame] | None = None,
                   events: Any = None, **options: Any) -> pd.DataFrame:
    from ..episodes import episodes as one

    tabs = dict(tables or {})
    if events_table:
        events = tabs.pop(_EVENTS)
    return one(frame, events=events, tables=tabs or None, **options)


def _map(layout: Any, func: Callable[..., pd.DataFrame], args: Sequence[Any], kwargs: Mapping[str, Any],
         meta: pd.DataFrame, keep_row: bool, token: str) -> dd.DataFrame:
    names = list(layout.tables)
    return dd.map_partitions(
        run_partition, layout.frame, *[layout.tables[k] for k in names], layout.verdict,
        call=Call(func, args, kwargs), table_names=names, keep_row=keep_row, schema=meta,
        meta=meta, token=token, enforce_metadata=False, align_dataframes=False,
    )
