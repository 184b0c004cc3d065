"""Assertions for unit-testing derived variables in your own pipeline.

Each function returns ``None`` when the property holds and raises ``AssertionError``
otherwise, with a message in the manner of pandas' testing helpers: what failed, in
which column, how many subjects and rows, the first subject ids and row labels, and a
small table of the failing rows (row label, id, time and the values involved).  Use
them in pytest tests on the frames your pipeline produces.

All of them are vectorised (no loop over rows or subjects) except
:func:`assert_past_only`, which re-runs the transforms a few times; see its cost note.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from .. import _kernels as K
from .._frames import frames
from .._panel import Panel, as_id_list
from .._subset import quiet
from .._tables import SideTable
from .._transform import Transform
from ..check import check
from ..derive import derive

__all__ = [
    "assert_constant_within",
    "assert_non_decreasing_within",
    "assert_non_increasing_within",
    "assert_past_only",
    "assert_derived_from",
    "assert_panel_structure",
]

#: How many failing rows the message shows.
SHOW_ROWS = 8


# --------------------------------------------------------------------------- helpers
def _same(a: pd.Series, b: pd.Series, rtol: float, atol: float) -> np.ndarray:
    """Element-wise "equal" of two aligned columns: missing equals missing, numbers
    within tolerance, anything else by ``==``."""
    a_na = a.isna().to_numpy()
    b_na = b.isna().to_numpy()
    numeric = all(
        pd.api.types.is_numeric_dtype(s.dtype) and not pd.api.types.is_bool_dtype(s.dtype) for s in (a, b)
    )
    if numeric:
        av = a.to_numpy(dtype="float64", na_value=np.nan)
        bv = b.to_numpy(dtype="float64", na_value=np.nan)
        with np.errstate(invalid="ignore"):
            close = (av == bv) | np.isclose(av, bv, rtol=rtol, atol=atol)
    else:
        av = a.astype(object).to_numpy()
        bv = b.astype(object).to_numpy()
        close = np.zeros(len(av), dtype=bool)
        both = ~a_na & ~b_na
        close[both] = np.asarray(av[both] == bv[both], dtype=bool)
    return (a_na & b_na) | (~a_na & ~b_na & close)


def _id_values(frame: pd.DataFrame, id_cols: Sequence[str], positions: np.ndarray) -> list[Any]:
    cols = [frame[c].iloc[positions].tolist() for c in id_cols]
    return cols[0] if len(cols) == 1 else list(zip(*cols))


def _fail(
    what: str,
    frame: pd.DataFrame,
    bad: np.ndarray,
    id_cols: Sequence[str],
    time: str | None,
    table: dict[str, Any] | None = None,
) -> None:
    """Raise the standard message for the rows ``bad`` (a boolean mask over ``frame``)."""
    __tracebackhide__ = True
    where = np.flatnonzero(bad)
    ids = list(dict.fromkeys(_id_values(frame, id_cols, where))) if id_cols else []
    labels = list(frame.index[where])
    shown = where[:SHOW_ROWS]
    columns: dict[str, Any] = {"row": frame.index[shown]}
    for c in id_cols:
        columns[c] = frame[c].iloc[shown].to_numpy(dtype=object)
    if time is not None:
        columns[time] = frame[time].iloc[shown].to_numpy(dtype=object)
    for name, values in (table or {}).items():
        columns[name] = np.asarray(values, dtype=object)[shown]
    listing = pd.DataFrame(columns).to_string(index=False)
    more = f"\n... and {len(where) - len(shown)} more row(s)" if len(where) > len(shown) else ""
    subjects = f"{len(ids)} subject(s), " if id_cols else ""
    id_line = f"first subject ids: {ids[:5]}\n" if id_cols else ""
    raise AssertionError(
        f"{what}: {subjects}{len(where)} row(s)\n"
        f"{id_line}"
        f"first row labels: {labels[:5]}\n"
        f"{listing}{more}"
    )


def _panel(frame: pd.DataFrame, id: str | Sequence[str], time: str, order: str | None = None) -> Panel:
    return Panel(frame, id=id, time=time, order=order)


# --------------------------------------------------------------------------- within subject
@frames(result="none")  # polars and pyarrow frames too
def assert_constant_within(
    frame: pd.DataFrame,
    col: str,
    *,
    id: str | Sequence[str],
    ignore_missing: bool = False,
) -> None:
    """Assert that ``col`` takes one value within each subject (e.g. a carried baseline).

    A subject whose value is missing on every row counts as constant.  A mix of missing
    and present values fails, unless ``ignore_missing=True`` (then only the present
    values must agree).  Values must be exactly equal; the message lists every row of
    the failing subjects that differs from the subject's first (present) value.

    >>> import pandas as pd
    >>> from panelfx.testing import assert_constant_within
    >>> df = pd.DataFrame({"pid": [1, 1, 2, 2], "base": [5.0, 5.0, 7.0, 7.5]})
    >>> assert_constant_within(df, "base", id="pid")
    Traceback (most recent call last):
    ...
    AssertionError: column 'base' is not constant within subject: 1 subject(s), 1 row(s)
    first subject ids: [2]
    first row labels: [3]
     row  pid  base  subject's first value
       3    2   7.5                    7.0
    """
    __tracebackhide__ = True
    id_cols = as_id_list(id)
    s = frame[col]
    keys = frame[id_cols[0]] if len(id_cols) == 1 else pd.MultiIndex.from_frame(frame[id_cols])
    key = pd.factorize(keys)[0]
    missing = s.isna().to_numpy()
    # Each subject's reference row: its first row, or its first present row with ignore_missing.
    tiebreak = missing.astype(np.int8) if ignore_missing else np.zeros(len(frame), dtype=np.int8)
    order = np.lexsort((np.arange(len(frame)), tiebreak, key))
    first_of = np.empty(len(frame), dtype=np.int64)
    if len(frame):
        k_sorted = key[order]
        starts = np.flatnonzero(np.r_[True, k_sorted[1:] != k_sorted[:-1]])
        first_of[order] = np.repeat(order[starts], np.diff(np.r_[starts, len(frame)]))
    ref = s.iloc[first_of].reset_index(drop=True)
    ok = _same(s.reset_index(drop=True), ref, 0.0, 0.0)
    if ignore_missing:
        ok |= missing
    if not ok.all():
        _fail(f"column {col!r} is not constant within subject", frame, ~ok, id_cols, None,
              {col: s.to_numpy(dtype=object), "subject's first value": ref.to_numpy(dtype=object)})


def _assert_monotonic(frame: pd.DataFrame, col: str, id: str | Sequence[str], time: str, strict: bool,
                      ignore_missing: bool, increasing: bool) -> None:
    __tracebackhide__ = True
    p = _panel(frame, id, time)
    v = p.columns.numeric(col)
    present = ~np.isnan(v)
    before = K.shift_index(p.subjects, 1)
    if ignore_missing:
        last = K.last_index_upto(p.subjects, present)
        prev = np.where(before >= 0, last[np.maximum(before, 0)], -1)
    else:
        prev = before
    pv = K.take(v, prev)
    with np.errstate(invalid="ignore"):
        step = v - pv if increasing else pv - v
        bad = (step <= 0) if strict else (step < 0)
    bad &= present & (prev >= 0) & ~np.isnan(pv)
    if not ignore_missing:
        bad |= ~present
    if bad.any():
        word = ("increasing" if strict else "non-decreasing") if increasing else \
            ("decreasing" if strict else "non-increasing")
        missing_note = "" if ignore_missing else " (missing values fail; ignore_missing=True skips them)"
        prev_rows = np.where(prev >= 0, p.original_positions(np.maximum(prev, 0)), -1)
        labels = np.asarray(frame.index, dtype=object)[np.maximum(prev_rows, 0)]
        labels[prev < 0] = None
        prev_label = labels
        _fail(
            f"column {col!r} is not {word} within subject in time order{missing_note}",
            frame, p.ordering.unsort(bad), p.id_cols, time,
            {col: p.ordering.unsort(v), "previous value": p.ordering.unsort(pv),
             "previous row": p.ordering.unsort(prev_label)},
        )


@frames(result="none")  # polars and pyarrow frames too
def assert_non_decreasing_within(
    frame: pd.DataFrame,
    col: str,
    *,
    id: str | Sequence[str],
    time: str,
    strict: bool = False,
    ignore_missing: bool = True,
) -> None:
    """Assert that ``col`` never goes down within a subject in time order (e.g. a
    cumulative exposure).  ``strict=True`` demands it go up at every step.

    Missing values are skipped by default: each present value is compared with the
    subject's last earlier present value.  ``ignore_missing=False`` makes a missing
    value a failure.  Rows may come in any order.

    >>> import pandas as pd
    >>> from panelfx.testing import assert_non_decreasing_within
    >>> df = pd.DataFrame({"pid": [1, 1, 1], "day": [0, 30, 60], "dose_cum": [0.0, 5.0, 4.0]})
    >>> assert_non_decreasing_within(df, "dose_cum", id="pid", time="day")
    Traceback (most recent call last):
    ...
    AssertionError: column 'dose_cum' is not non-decreasing within subject in time order: 1 subject(s), 1 row(s)
    first subject ids: [1]
    first row labels: [2]
     row  pid  day  dose_cum  previous value  previous row
       2    1   60       4.0             5.0             1
    """
    __tracebackhide__ = True
    _assert_monotonic(frame, col, id, time, strict, ignore_missing, increasing=True)


@frames(result="none")  # polars and pyarrow frames too
def assert_non_increasing_within(
    frame: pd.DataFrame,
    col: str,
    *,
    id: str | Sequence[str],
    time: str,
    strict: bool = False,
    ignore_missing: bool = True,
) -> None:
    """Assert that ``col`` never goes up within a subject in time order (e.g. a
    remaining supply); the mirror of :func:`assert_non_decreasing_within`."""
    __tracebackhide__ = True
    _assert_monotonic(frame, col, id, time, strict, ignore_missing, increasing=False)


# --------------------------------------------------------------------------- past-only
@frames(result="none", tables="tables")  # polars and pyarrow frames too
def assert_past_only(
    frame: pd.DataFrame,
    *transforms: Transform,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    max_ranks: int | None = 12,
    seed: int = 0,
    rtol: float = 1e-9,
    atol: float = 1e-12,
    order: str | None = None,
    time_unit: str | None = None,
    tables: Mapping[str, pd.DataFrame] | None = None,
) -> None:
    """Assert that the transforms' outputs do not use the future.

    First every transform must declare itself past-only (its ``past_only`` property).
    Then the claim is tested on ``frame``: for an occasion rank r (0 = each subject's
    first occasion), the frame is cut after each subject's r-th occasion (subjects with
    fewer occasions keep all their rows), the transforms are re-run on the cut frame, and
    every remaining row must get the value it got from the whole frame.  A value that
    changes when later occasions are removed was computed from them.

    Cost: one :func:`~panelfx.derive` on at most ``len(frame)`` rows per rank checked.
    With ``max_ranks=None`` every rank is checked (as many derives as the longest subject
    has occasions); by default at most 12 ranks are, always including the first two and
    the last, the others drawn at random with ``seed``.  On a million rows with a dozen
    occasions per subject that is about a dozen derives: seconds, not hours.

    Numbers are compared with ``rtol`` / ``atol`` (the running sums of a cut frame may
    round differently in the last digits), everything else exactly.

    Side tables (``tables``, as for :func:`~panelfx.derive`) are cut at the same time as
    each subject's rows: records whose time (every time column the transforms order the
    table by) lies after the subject's cut-off time are removed, and end times beyond it
    (a dosing record still running) are brought back to it.

    >>> import pandas as pd, panelfx as pfx
    >>> from panelfx.testing import assert_past_only
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2], "day": [0, 7, 14, 0], "y": [1.0, 3.0, 2.0, 5.0]})
    >>> assert_past_only(df, pfx.lag("y"), pfx.change_from_previous("y"), id="pid", time="day")
    >>> assert_past_only(df, pfx.lag("y", -1), id="pid", time="day")
    Traceback (most recent call last):
    ...
    AssertionError: transform #1 (lag) declares that it uses later occasions (past_only is False): ...
    """
    __tracebackhide__ = True
    for i, tr in enumerate(transforms):
        if not tr.past_only:
            raise AssertionError(
                f"transform #{i + 1} ({tr.type_name}) declares that it uses later occasions "
                f"(past_only is False): {tr!r}"
            )
    keys: dict[str, Any] = {"id": id, "time": time, "unit": unit, "order": order, "time_unit": time_unit}
    full = derive(frame, *transforms, **keys, tables=tables)
    outputs = [c for tr in transforms for c in tr.outputs()]
    p = _panel(frame, id, time, order)
    pos = p.ordering.unsort(p.subjects.pos)
    if p.n == 0:
        return
    longest = int(p.subjects.lengths.max())
    ranks = list(range(longest - 1))  # cutting after the last rank changes nothing
    if max_ranks is not None and len(ranks) > max_ranks:
        rng = np.random.default_rng(seed)
        fixed = [0, 1, longest - 2]
        rest = [r for r in ranks if r not in fixed]
        pick = rng.choice(rest, size=max(max_ranks - len(fixed), 0), replace=False).tolist()
        ranks = sorted(set(fixed) | set(pick))
    for r in ranks:
        keep = pos <= r
        cut = frame.loc[keep] if frame.index.is_unique else frame.iloc[np.flatnonzero(keep)]
        cut_tables = _cut_tables(tables, transforms, p, r) if tables else None
        with quiet():  # the cut removes later occasions on purpose: no SubsetWarning
            again = derive(cut, *transforms, **keys, tables=cut_tables)
        kept = full.iloc[np.flatnonzero(keep)]
        for col in outputs:
            ok = _same(again[col].reset_index(drop=True), kept[col].reset_index(drop=True), rtol, atol)
            if not ok.all():
                _fail(
                    f"column {col!r} uses later occasions: its value changes when each subject's rows after "
                    f"occasion rank {r} (0 = first) are removed",
                    cut, ~ok, p.id_cols, time,
                    {"with all rows": kept[col].to_numpy(dtype=object),
                     f"cut after rank {r}": again[col].to_numpy(dtype=object)},
                )


def _no_silent_downcasting() -> Any:
    """pandas 2.2 warns that ``where`` may downcast; pandas 3 no longer does (and has no such option)."""
    import contextlib

    if int(pd.__version__.split(".")[0]) >= 3:
        return contextlib.nullcontext()
    return pd.option_context("future.no_silent_downcasting", True)


def _cut_tables(tables: Mapping[str, pd.DataFrame], transforms: Sequence[Transform], p: Panel,
                r: int) -> dict[str, pd.DataFrame]:
    """Each side table cut at each subject's time of occasion rank ``r`` (subjects with fewer
    occasions keep every record): later records removed, later ends brought back to it."""
    frame = p.frame
    long_enough = p.subjects.lengths > r + 1
    at = np.where(long_enough, p.original_positions(np.minimum(p.subjects.starts + r, p.n - 1)), -1)
    times = frame[p.time_col]
    # numpy-backed columns as ndarrays: pandas 2.2 warns when take gets a NumpyExtensionArray
    values = times.to_numpy() if isinstance(times.dtype, np.dtype) else times.array
    cut_of_subject = pd.api.extensions.take(values, at, allow_fill=True)
    out: dict[str, pd.DataFrame] = {}
    for name, table in tables.items():
        uses = [u for tr in transforms for u in tr.tables() if u.name == name]
        if not uses:
            out[name] = table
            continue
        psub = SideTable(name, table, p).psub
        cut = pd.Series(pd.api.extensions.take(cut_of_subject, psub, allow_fill=True), index=table.index)
        drop = np.zeros(len(table), dtype=bool)
        for col in dict.fromkeys(u.time for u in uses):
            drop |= (table[col] > cut).fillna(False).to_numpy(dtype=bool)
        kept = table.iloc[np.flatnonzero(~drop)].copy()
        cut = cut.iloc[np.flatnonzero(~drop)]
        for col in dict.fromkeys(e for u in uses for e in u.ends):
            late = (kept[col] > cut).fillna(False).to_numpy(dtype=bool)
            if late.any():
                with _no_silent_downcasting():
                    kept[col] = kept[col].where(~late, cut)
        out[name] = kept
    return out


# --------------------------------------------------------------------------- re-derivation
def assert_derived_from(
    derived: pd.DataFrame,
    source: pd.DataFrame,
    *transforms: Transform,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    match: str = "index",
    check_dtype: bool = True,
    rtol: float = 1e-9,
    atol: float = 1e-12,
) -> None:
    """Assert that ``derived`` holds what ``transforms`` produce from ``source``
    (an audit: re-run the stored derivation and compare).

    Every output column of the transforms must be in ``derived`` and equal, row by row,
    what :func:`~panelfx.derive` computes from ``source``; so must every column of
    ``source``.  Rows are matched by index label (``match="index"``, the default; the
    labels must be the same set) or by the (id, time) key (``match="keys"``, for a
    frame read back from a file that lost its index or row order).  Numbers are
    compared with ``rtol`` / ``atol``, anything else exactly; ``check_dtype=False``
    ignores dtype differences (e.g. integers read back as floats).

    >>> import pandas as pd, panelfx as pfx
    >>> from panelfx.testing import assert_derived_from
    >>> src = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 7, 0], "y": [1.0, 3.0, 5.0]})
    >>> stored = pfx.derive(src, pfx.baseline("y"), id="pid", time="day")
    >>> assert_derived_from(stored, src, pfx.baseline("y"), id="pid", time="day")
    >>> stored.loc[1, "y_baseline"] = 3.0
    >>> assert_derived_from(stored, src, pfx.baseline("y"), id="pid", time="day")
    Traceback (most recent call last):
    ...
    AssertionError: column 'y_baseline' differs from its re-derivation: 1 subject(s), 1 row(s)
    first subject ids: [1]
    first row labels: [1]
     row  pid  day  stored  re-derived
       1    1    7     3.0         1.0
    """
    __tracebackhide__ = True
    id_cols = as_id_list(id)
    want = derive(source, *transforms, id=id, time=time, unit=unit)
    missing = [c for c in want.columns if c not in derived.columns]
    if missing:
        raise AssertionError(f"derived frame lacks column(s) {missing} (it has {list(derived.columns)})")
    if len(derived) != len(want):
        raise AssertionError(f"derived frame has {len(derived)} rows, the source {len(want)}")
    if match == "index":
        if not want.index.is_unique or not derived.index.is_unique:
            raise AssertionError("match='index' needs unique index labels; use match='keys'")
        extra = derived.index.difference(want.index)
        if len(extra):
            raise AssertionError(f"derived frame has row labels not in the source: {list(extra[:5])} "
                                 f"({len(extra)} in all); use match='keys' to match rows by (id, time)")
        got = derived.loc[want.index]
    elif match == "keys":
        keys = [*id_cols, time]
        for f, what in ((derived, "derived"), (want, "source")):
            if f.duplicated(keys).any():
                raise AssertionError(f"{what} frame has duplicate (id, time) keys: cannot match rows by keys")
        merged = want[keys].reset_index(drop=True).merge(
            derived.reset_index(drop=True).reset_index(names="__pos__")[[*keys, "__pos__"]], on=keys, how="left")
        if merged["__pos__"].isna().any():
            _fail("source (id, time) keys not found in the derived frame", want,
                  merged["__pos__"].isna().to_numpy(), id_cols, time)
        got = derived.iloc[merged["__pos__"].astype("int64").to_numpy()]
        got.index = want.index
    else:
        raise ValueError(f"match must be 'index' or 'keys', got {match!r}")
    for col in want.columns:
        g, w = got[col], want[col]
        if check_dtype and g.dtype != w.dtype:
            raise AssertionError(
                f"column {col!r} has dtype {g.dtype} but its re-derivation has {w.dtype} "
                f"(check_dtype=False ignores dtypes)")
        ok = _same(g.reset_index(drop=True), w.reset_index(drop=True), rtol, atol)
        if not ok.all():
            what = "differs from its re-derivation" if col not in source.columns else "differs from the source"
            _fail(f"column {col!r} {what}", want, ~ok, id_cols, time,
                  {"stored": g.to_numpy(dtype=object), "re-derived": w.to_numpy(dtype=object)})


# --------------------------------------------------------------------------- structure
def assert_panel_structure(
    frame: pd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    spacing: Any = None,
    tolerance: Any = None,
) -> None:
    """Assert that ``frame`` is a well-formed long panel: no missing id or time and no
    duplicate (id, time); with ``spacing`` also that every visit is on schedule (no
    early, late, missed or extra visit, as :func:`panelfx.check` defines them).  Like
    every warning of :func:`panelfx.check`, ``interval_data`` (the frame looks like
    (start, stop] data declared with its start column as time) fails it too.

    A missing id/time column or a time column of text raise their usual
    :class:`~panelfx.PanelError`, as in :func:`panelfx.check`.

    >>> import pandas as pd
    >>> from panelfx.testing import assert_panel_structure
    >>> df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 30, 0]}, index=["a", "b", "c"])
    >>> assert_panel_structure(df, id="pid", time="day", spacing=30)
    >>> assert_panel_structure(df.assign(day=[0, 0, 0]), id="pid", time="day")
    Traceback (most recent call last):
    ...
    AssertionError: panel structure: 2 problem row(s) (duplicate: 2)
    first subject ids: [1]
    first row labels: ['a', 'b']
      problem  pid  row  day                       detail
    duplicate    1    a    0 2 rows share this (id, time)
    duplicate    1    b    0 2 rows share this (id, time)
    """
    __tracebackhide__ = True
    id_cols = as_id_list(id)
    report = check(frame, id=id, time=time, spacing=spacing, tolerance=tolerance)
    report = report[report["severity"] != "note"]
    if len(report):
        counts = report["problem"].value_counts(sort=False)
        summary = ", ".join(f"{k}: {v}" for k, v in counts.items())
        ids = list(dict.fromkeys(report["id"].tolist()))
        rows = [r for r in report["row"].tolist() if r is not None]
        show = report.head(SHOW_ROWS)
        id_name = id_cols[0] if len(id_cols) == 1 else str(tuple(id_cols))
        listing = pd.DataFrame({"problem": show["problem"], id_name: show["id"], "row": show["row"],
                                time: show["time"], "detail": show["detail"]}).to_string(index=False)
        more = f"\n... and {len(report) - len(show)} more" if len(report) > len(show) else ""
        raise AssertionError(
            f"panel structure: {len(report)} problem row(s) ({summary})\n"
            f"first subject ids: {ids[:5]}\n"
            f"first row labels: {rows[:5]}\n"
            f"{listing}{more}"
        )
