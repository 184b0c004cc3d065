"""Example configurations of every transform type, for the cross-cutting tests.

Each registered transform type (``panelfx._transform.REGISTRY``) needs at least one
entry here and a reference in ``panelfx.testing.reference``; ``test_all_transforms``
fails otherwise, so a new transform cannot skip the shared checks (reference property
test, past-only check, invariants, input left unchanged, saved-options round trip).

Entries use the columns of ``panelfx.testing.strategies.panels()``: ``y`` (float with
missing values), ``x`` (int), ``flag`` (bool), ``dose`` (non-negative float).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd

import panelfx as pfx
from panelfx._transform import Transform
from panelfx.testing.strategies import TIME_KINDS, PanelCase

NUMERIC_TIMES = ("int", "float")


def add_reference_time(frame: pd.DataFrame, case: PanelCase) -> pd.DataFrame:
    """A column ``ref_t``, constant within subject: the subject's first time + 10 units
    (10 days for datetimes, 10 hours for timedeltas)."""
    first = frame.groupby(case.id, sort=False, observed=True)[case.time].transform("min")
    t = frame[case.time]
    if pd.api.types.is_datetime64_any_dtype(t.dtype) or pd.api.types.is_timedelta64_dtype(t.dtype) \
            or isinstance(t.dtype, pd.ArrowDtype) and not pd.api.types.is_numeric_dtype(t.dtype):
        step: Any = pd.Timedelta(10, unit="D") if not pd.api.types.is_timedelta64_dtype(t.dtype) \
            else pd.Timedelta(10, unit="h")
    else:
        step = 10
    return frame.assign(ref_t=first + step)


def add_levels(frame: pd.DataFrame, case: PanelCase) -> pd.DataFrame:
    """Columns ``region`` (text) and ``clinic`` (int), constant within subject, nesting the
    subjects: clinic numbers restart in each region."""
    sub = frame.groupby(case.id, sort=False, observed=True).ngroup().to_numpy()
    return frame.assign(region=pd.Series(sub % 2, index=frame.index).map({0: "North", 1: "South"}),
                        clinic=(sub // 2) % 2)


def add_reference_with_gaps(frame: pd.DataFrame, case: PanelCase) -> pd.DataFrame:
    """``ref_t`` as :func:`add_reference_time`, missing on the rows where ``x`` is 5."""
    out = add_reference_time(frame, case)
    return out.assign(ref_t=out["ref_t"].where(out["x"] != 5))


def add_visits(frame: pd.DataFrame, case: PanelCase) -> pd.DataFrame:
    """Study days ``ady`` (the time itself for numbers, days since 2024-01-01 for datetimes,
    hours for timedeltas), a visit code ``vn`` (15-day buckets, missing when ``ady`` is a
    multiple of 7) and its target day ``vt`` (the middle of the bucket: distances often tie)."""
    t = frame[case.time]
    if pd.api.types.is_timedelta64_dtype(t.dtype):
        ady = (t / pd.Timedelta(1, unit="h")).astype("float64")
    elif pd.api.types.is_numeric_dtype(t.dtype) and not isinstance(t.dtype, pd.ArrowDtype):
        ady = t.astype("float64")
    else:
        naive = t.dt.tz_localize(None) if getattr(t.dt, "tz", None) is not None else t
        ady = ((pd.Series(naive, dtype="datetime64[ns]") - pd.Timestamp("2024-01-01")) / pd.Timedelta(1, unit="D"))
    vn = (ady // 15).where(ady % 7 != 0)
    return frame.assign(ady=ady.to_numpy(), vn=vn.to_numpy(), vt=(vn * 15 + 7).to_numpy())


#: Analysis windows over the generated times (-20 .. about 220): open ends, a gap (21-24).
VISIT_WINDOWS = pfx.windows([("w1", None, 0, -5), ("w2", 1, 20, 10), ("w3", 25, 60, 40), ("w4", 61, None, 90)])
#: Overlapping windows, the nearest target deciding (ties at 15 and 55 go to the earlier).
OVERLAPPING = pfx.windows([("a", -30, 20, 0), ("b", 10, 50, 30), ("c", 40, 120, 80)], overlap="nearest_target")


def _step(t: pd.Series, k: float) -> Any:
    """k time units of a time column: k for numbers, k days for datetimes, k hours for timedeltas."""
    if pd.api.types.is_numeric_dtype(t.dtype) and not pd.api.types.is_bool_dtype(t.dtype):
        return k
    return pd.Timedelta(k, unit="h" if pd.api.types.is_timedelta64_dtype(t.dtype) else "D")


def side_tables(frame: pd.DataFrame, case: PanelCase) -> dict[str, pd.DataFrame]:
    """Side tables made from a panel (invented, deterministic), id columns in their own dtypes.

    ``labs``: a record 2.25 units before each row (``lab`` from y, ``lab2`` from x, ``seq``
    an order column), one more at the row's own time where x is even, exact duplicates
    where x is 0 (ties that agree), a subject absent from the panel; not in time order.
    ``tied``: ``labs`` plus, where x is odd, a second record at the same time with other
    values (ties that disagree).  ``ex``: dosing records from 1 unit before to 3 after each
    flagged row, dose from ``dose`` (overlapping)."""
    ids = [case.id] if isinstance(case.id, str) else list(case.id)
    t = frame[case.time]
    base = frame[ids].reset_index(drop=True)
    tt = t.reset_index(drop=True)
    x = frame["x"].reset_index(drop=True).astype("float64")
    y = frame["y"].reset_index(drop=True).astype("float64")
    n = len(frame)
    early = base.assign(drawn=tt - _step(t, 2.25), lab=y.to_numpy(), lab2=x.to_numpy(), seq=np.arange(n) * 4)
    even = (x % 2 == 0).to_numpy()
    same = base[even].assign(drawn=tt[even], lab=(y[even] * 2).to_numpy(), lab2=x[even].to_numpy() + 1,
                             seq=np.flatnonzero(even) * 4 + 1)
    zero = (x == 0).to_numpy()
    dup = early[zero].assign(seq=np.flatnonzero(zero) * 4 + 2)
    odd = (x % 2 != 0).to_numpy()
    other = early[odd].assign(lab=(y[odd] + 1).to_numpy(), lab2=(x[odd] + 3).to_numpy(),
                              seq=np.flatnonzero(odd) * 4 + 3)
    parts = [early, same, dup]
    if n and not any(isinstance(frame[c].dtype, pd.CategoricalDtype) for c in ids):
        ghost = early.iloc[:1].copy()
        for c in ids:  # a subject the panel does not have, with an id of the same dtype
            v = frame[c]
            ghost[c] = (v.iloc[:1] * 0 + 999_999).to_numpy() if pd.api.types.is_numeric_dtype(v.dtype) else "ghost"
        parts.append(ghost)
    labs = pd.concat(parts, ignore_index=True).iloc[::-1].reset_index(drop=True)  # not in time order
    tied = pd.concat([labs, other], ignore_index=True)
    flag = frame["flag"].reset_index(drop=True).astype(bool).to_numpy()
    ex = base[flag].assign(start=tt[flag] - _step(t, 1), stop=tt[flag] + _step(t, 3),
                           mg=frame["dose"].reset_index(drop=True)[flag].to_numpy())
    return {"labs": labs, "tied": tied, "ex": ex}


def numeric_time(case: PanelCase) -> bool:
    t = case.frame[case.time]
    return pd.api.types.is_numeric_dtype(t.dtype) and not pd.api.types.is_bool_dtype(t.dtype)


@dataclasses.dataclass(frozen=True)
class Entry:
    """One example configuration.

    ``build`` makes the transform given whether the panel's time is numeric (spans are
    numbers then, strings such as "7D" otherwise).  ``time_kinds`` limits the panels it is
    tried on; ``prepare`` adds any extra column it needs.  ``constant`` /
    ``non_decreasing`` list the positions of outputs that must be constant within subject
    / non-decreasing in time order.
    """

    label: str
    build: Callable[[bool], Transform]
    time_kinds: tuple[str, ...] = TIME_KINDS
    prepare: Callable[[pd.DataFrame, PanelCase], pd.DataFrame] | None = None
    rtol: float = 1e-9
    constant: tuple[int, ...] = ()
    non_decreasing: tuple[int, ...] = ()
    tables: Callable[[pd.DataFrame, PanelCase], dict[str, pd.DataFrame]] | None = None

    def make(self, case: PanelCase) -> Transform:
        return self.build(numeric_time(case))

    def frame(self, case: PanelCase) -> pd.DataFrame:
        return case.frame if self.prepare is None else self.prepare(case.frame, case)

    def tables_for(self, frame: pd.DataFrame, case: PanelCase) -> dict[str, pd.DataFrame] | None:
        """The side tables the transform reads, made from the panel (``None`` when it reads none)."""
        return None if self.tables is None else self.tables(frame, case)

    def example(self) -> Transform:
        """The transform for numeric times (for tests that need no panel)."""
        return self.build(True)


def fixed(tr: Transform, **kw: Any) -> Entry:
    """An entry that does not depend on the time kind."""
    return Entry(label=repr(tr), build=lambda numeric: tr, **kw)


def spans(label: str, make: Callable[[Any], Transform], number: float, text: str, **kw: Any) -> Entry:
    """An entry whose option is a span: ``number`` for numeric times, ``text`` (e.g. "7D") otherwise."""
    return Entry(label=label, build=lambda numeric: make(number if numeric else text), **kw)


def _build() -> dict[str, list[Entry]]:
    cat: dict[str, list[Entry]] = {}
    cat["baseline"] = [
        fixed(pfx.baseline("y"), constant=(0,)),
        fixed(pfx.baseline("y", "first"), constant=(0,)),
        fixed(pfx.baseline("x", "first_valid"), constant=(0,)),
        fixed(pfx.baseline("flag"), constant=(0,)),
        fixed(pfx.baseline("y", "last_before", reference=10), time_kinds=NUMERIC_TIMES, constant=(0,)),
        fixed(pfx.baseline("y", "last_before", reference="ref_t"), prepare=add_reference_time, constant=(0,)),
    ]
    cat["change_from_baseline"] = [
        fixed(pfx.change_from_baseline("y")),
        fixed(pfx.change_from_baseline("y", "percent", after_baseline_only=True)),
        fixed(pfx.change_from_baseline("y", "ratio", rule="first")),
        fixed(pfx.change_from_baseline("x", "difference")),
        fixed(pfx.change_from_baseline("y", rule="last_before", reference="ref_t", after_baseline_only=True),
              prepare=add_reference_time),
    ]
    cat["change_from_previous"] = [
        fixed(pfx.change_from_previous("y")),
        fixed(pfx.change_from_previous("y", "percent")),
        fixed(pfx.change_from_previous("y", "rate", skip_missing=True)),
        fixed(pfx.change_from_previous("y", "difference", skip_missing=True)),
        fixed(pfx.change_from_previous("dose", "rate")),
    ]
    cat["lag"] = [
        fixed(pfx.lag("y")),
        fixed(pfx.lag("y", 2)),
        fixed(pfx.lag("x", -1)),
        fixed(pfx.lag("flag", 1)),
        spans("lag offset", lambda s: pfx.lag("y", offset=s), 10, "10D"),
        Entry("lag offset+tolerance", lambda num: pfx.lag("x", offset=10 if num else "10D",
                                                         tolerance=5 if num else "5D")),
        Entry("lag offset, tolerance 0", lambda num: pfx.lag("flag", offset=3 if num else "3D",
                                                            tolerance=0 if num else "0D")),
    ]
    cat["cumulative"] = [
        fixed(pfx.cumulative("dose"), non_decreasing=(0,)),
        fixed(pfx.cumulative("dose", "step"), non_decreasing=(0,)),
        fixed(pfx.cumulative("dose", "trapezoid"), non_decreasing=(0,)),
        fixed(pfx.cumulative("y")),
        fixed(pfx.cumulative("y", missing="propagate")),
        fixed(pfx.cumulative("y", "step", missing="propagate")),
        fixed(pfx.cumulative("y", "trapezoid")),
        spans("cumulative restart", lambda s: pfx.cumulative("dose", "step", restart_after=s), 15, "15D"),
    ]
    cat["carry_forward"] = [
        fixed(pfx.carry_forward("y")),
        fixed(pfx.carry_forward("y", limit=1)),
        spans("carry_forward max_span", lambda s: pfx.carry_forward("y", max_span=s), 20, "20D"),
        Entry("carry_forward both limits", lambda num: pfx.carry_forward("y", limit=2, max_span=30 if num
                                                                         else "30D")),
        fixed(pfx.carry_forward("flag")),
    ]
    cat["events_so_far"] = [
        fixed(pfx.events_so_far("flag"), non_decreasing=(0,)),
        fixed(pfx.events_so_far("flag", include_current=False), non_decreasing=(0,)),
        fixed(pfx.events_so_far("x", any_nonzero=True), non_decreasing=(0,)),
    ]
    cat["ever"] = [
        fixed(pfx.ever("flag"), non_decreasing=(0,)),
        fixed(pfx.ever("flag", include_current=False), non_decreasing=(0,)),
        fixed(pfx.ever("y", any_nonzero=True)),
    ]
    cat["time_since"] = [
        fixed(pfx.time_since("flag")),
        fixed(pfx.time_since("flag", "first"), non_decreasing=(0,)),
        fixed(pfx.time_since("flag", include_current=False)),
        fixed(pfx.time_since("x", "first", include_current=False, any_nonzero=True)),
    ]
    cat["gap"] = [fixed(pfx.gap())]
    cat["occasion"] = [fixed(pfx.occasion(), non_decreasing=(0,))]
    cat["time_since_baseline"] = [fixed(pfx.time_since_baseline(), non_decreasing=(0,))]
    cat["within_between"] = [
        fixed(pfx.within_between("y"), constant=(0,)),
        fixed(pfx.within_between("y", "baseline"), constant=(0,)),
        fixed(pfx.within_between("x"), constant=(0,)),
        fixed(pfx.within_between("y", levels=["region"]), prepare=add_levels, constant=(0, 1)),
        fixed(pfx.within_between("y", levels=["region", "clinic"], fit="flag"), prepare=add_levels,
              constant=(0, 1, 2)),
        fixed(pfx.within_between("x", fit="flag"), constant=(0,)),
        fixed(pfx.within_between("y", levels=["clinic"], codes="unique"), prepare=add_levels, constant=(0, 1)),
    ]
    cat["rolling"] = [
        fixed(pfx.rolling("y", occasions=3)),
        fixed(pfx.rolling("y", "sum", occasions=2, exclude_current=True)),
        fixed(pfx.rolling("y", "max")),
        fixed(pfx.rolling("dose", "sum"), non_decreasing=(0,)),
        spans("rolling span mean", lambda s: pfx.rolling("y", span=s), 20, "20D"),
        spans("rolling span count both", lambda s: pfx.rolling("y", "count", span=s, closed="both"), 10, "10D"),
        spans("rolling span std", lambda s: pfx.rolling("y", "std", span=s, min_valid=2), 30, "30D"),
        spans("rolling span median left", lambda s: pfx.rolling("x", "median", span=s, closed="left"), 15,
              "15D"),
    ]
    cat["carry_forward"].append(fixed(pfx.carry_forward("y", flag=True)))
    # "no_day_0" counts whole days: on datetimes here (generated float times are halves)
    cat["study_day"] = [
        Entry("study_day", lambda num: pfx.study_day("ref_t", "offset" if num else "no_day_0"),
              prepare=add_reference_time, non_decreasing=(0,)),
        fixed(pfx.study_day("ref_t", "offset"), prepare=add_reference_with_gaps),
        Entry("study_day of another date", lambda num: pfx.study_day("ref_t", "offset" if num else "no_day_0",
                                                                     date="ref_t", name="ref_day"),
              prepare=add_reference_with_gaps),
    ]
    cat["analysis_visit"] = [
        fixed(pfx.analysis_visit(VISIT_WINDOWS), time_kinds=NUMERIC_TIMES),
        fixed(pfx.analysis_visit(VISIT_WINDOWS, outside="Unscheduled", name="avisit"), time_kinds=NUMERIC_TIMES),
        fixed(pfx.analysis_visit(OVERLAPPING, day="ady"), prepare=add_visits),
    ]
    cat["visit_pick"] = [
        fixed(pfx.visit_pick("y", "nearest", prefer="later", visit="vn", target="vt", day="ady"), prepare=add_visits),
        fixed(pfx.visit_pick("y", "nearest", prefer="earlier", visit="vn", target="vt", day="ady"),
              prepare=add_visits),
        fixed(pfx.visit_pick("y", "first", visit="vn"), prepare=add_visits),
        fixed(pfx.visit_pick("y", "last", visit="vn"), prepare=add_visits),
        fixed(pfx.visit_pick("x", "max", prefer="earlier", visit="vn"), prepare=add_visits),
        fixed(pfx.visit_pick("y", "min", prefer="later", visit="vn"), prepare=add_visits),
        fixed(pfx.visit_pick("y", "last_on_or_before_target", visit="vn", target="vt", day="ady"),
              prepare=add_visits),
    ]
    cat["carry_baseline"] = [
        fixed(pfx.carry_baseline("y")),
        fixed(pfx.carry_baseline("y", "first", flag=True)),
        fixed(pfx.carry_baseline("y", "last_before", reference="ref_t", flag=True), prepare=add_reference_time),
        fixed(pfx.carry_baseline("flag")),
    ]
    cat["carry_worst"] = [
        fixed(pfx.carry_worst("y", "max")),
        fixed(pfx.carry_worst("y", "min", flag=True)),
        fixed(pfx.carry_worst("x", "max", flag=True)),
    ]
    side = {"tables": side_tables}
    cat["as_of"] = [
        fixed(pfx.as_of("labs", "lab", time="drawn"), **side),
        fixed(pfx.as_of("labs", ["lab", "lab2"], time="drawn", keep=("value", "age", "time")), **side),
        fixed(pfx.as_of("labs", ["lab", "lab2"], time="drawn", together=True, keep=("value", "age")), **side),
        fixed(pfx.as_of("tied", "lab", time="drawn", skip_missing=False, include_current=False, ties="mean"),
              **side),
        fixed(pfx.as_of("tied", "lab", time="drawn", ties="last", order="seq"), **side),
        fixed(pfx.as_of("tied", "lab", time="drawn", direction="forward", ties="max"), **side),
        fixed(pfx.as_of("tied", "lab", time="drawn", direction="nearest", ties="min", keep=("value", "age")),
              **side),
        fixed(pfx.as_of("labs", time="drawn", keep=("age",)), **side),
        spans("as_of within", lambda s: pfx.as_of("tied", "lab2", time="drawn", within=s, ties="first",
                                                  order="seq"), 3, "3D", **side),
        spans("as_of nearest within", lambda s: pfx.as_of("tied", "lab", time="drawn", direction="nearest",
                                                          within=s, ties="mean"), 1, "1D", **side),
    ]
    cat["table_window"] = [
        fixed(pfx.table_window("labs", time="drawn"), non_decreasing=(0,), **side),
        fixed(pfx.table_window("labs", "lab", "max", time="drawn"), **side),
        fixed(pfx.table_window("labs", "lab", "count", time="drawn", closed="left"), **side),
        spans("table_window sum", lambda s: pfx.table_window("labs", "lab", "sum", time="drawn", span=s), 10,
              "10D", **side),
        spans("table_window mean both", lambda s: pfx.table_window("labs", "lab2", "mean", time="drawn", span=s,
                                                                   closed="both", min_valid=2), 5, "5D", **side),
        spans("table_window min neither", lambda s: pfx.table_window("labs", "lab", "min", time="drawn", span=s,
                                                                     closed="neither"), 8, "8D", **side),
        spans("table_window any", lambda s: pfx.table_window("ex", time="start", stat="any", span=s), 4, "4D",
              **side),
    ]
    cat["exposure"] = [
        fixed(pfx.exposure("ex", dose="mg", start="start", end="stop"), non_decreasing=(0,), **side),
        fixed(pfx.exposure("ex", dose="mg", start="start", end="stop", include_current=False), **side),
        fixed(pfx.exposure("ex", dose="mg", start="start", end="stop", stat="current"), **side),
        fixed(pfx.exposure("ex", start="start", end="stop", stat="days_on"), non_decreasing=(0,), **side),
        fixed(pfx.exposure("ex", dose="mg", start="start", end="stop", stat="intensity", overlap="latest"), **side),
        fixed(pfx.exposure("ex", dose="mg", start="start", end="stop", stat="cumulative", overlap="latest",
                           inclusive=False), **side),
        spans("exposure on_treatment grace", lambda s: pfx.exposure("ex", start="start", end="stop",
                                                                    stat="on_treatment", grace=s), 2, "2D", **side),
        spans("exposure lag", lambda s: pfx.exposure("ex", dose="mg", start="start", end="stop", lag=s), 3, "3D",
              **side),
    ]
    cat["first_dose"] = [fixed(pfx.first_dose("ex", start="start"), constant=(0,), **side)]
    cat["last_dose"] = [fixed(pfx.last_dose("ex", start="start", end="stop"), constant=(0,), **side)]
    return cat


#: type_name -> example entries.
CATALOGUE: dict[str, list[Entry]] = _build()

#: Every entry with its type name and a readable id, for parametrize.
ENTRIES: list[tuple[str, Entry]] = [(t, e) for t, es in CATALOGUE.items() for e in es]


def entry_id(item: tuple[str, Entry]) -> str:
    return item[1].label


def renamed(tr: Transform, i: int) -> Transform:
    """The same transform with outputs renamed so that many can share one derive."""
    fields = {f.name for f in dataclasses.fields(tr)}
    outs = tr.outputs()
    if "names" in fields and (len(outs) > 1 or "name" not in fields):
        return dataclasses.replace(tr, names=tuple(f"o{i}_{k}" for k in range(len(outs))))
    if "name" in fields:
        # one output, or several named after it (a value and its "_flag" column)
        again = dataclasses.replace(tr, name=f"o{i}")
        if len(outs) == 1 or not set(again.outputs()) & set(outs):
            return again
    return tr
