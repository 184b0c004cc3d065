"""Visit pick: one record per (subject, planned visit), chosen by a stated rule."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd

from .. import _visits as V
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_choice, check_column_name, check_name
from ..errors import OptionError
from .analysis_visit import day_values

RULE_WORDS = {
    "nearest": "the record nearest the target day",
    "first": "the first record",
    "last": "the last record",
    "max": "the record with the largest value",
    "min": "the record with the smallest value",
    "last_on_or_before_target": "the last record on or before the target day",
}


@dataclasses.dataclass(frozen=True, kw_only=True)
class VisitPick(Transform):
    """Configured :func:`visit_pick`."""

    type_name = "visit_pick"
    col: str
    rule: Literal["nearest", "first", "last", "max", "min", "last_on_or_before_target"]
    prefer: Literal["earlier", "later"] | None = None
    visit: str = "visit_number"
    target: str = "visit_target"
    day: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_choice("rule", self.rule, V.PICK_RULES)
        check_column_name("visit", self.visit)
        check_column_name("target", self.target)
        if self.day is not None:
            check_column_name("day", self.day)
        check_name(self.name)
        if self.rule in V.TIE_RULES:
            if self.prefer is None:
                tie = "equally near records" if self.rule == "nearest" else "records with equal values"
                raise OptionError(f"rule={self.rule!r} needs prefer='earlier' or prefer='later' to choose between "
                                  f"{tie} (analysis plans differ, so panelfx does not choose)")
            check_choice("prefer", self.prefer, ("earlier", "later"))
        elif self.prefer is not None:
            raise OptionError(f"prefer= is used only with rules {list(V.TIE_RULES)}; rule={self.rule!r} "
                              f"cannot tie (occasions are in time order)")

    @property
    def needs_target(self) -> bool:
        return self.rule in V.TARGET_RULES

    def inputs(self) -> tuple[str, ...]:
        cols = [self.col, self.visit]
        if self.needs_target:
            cols.append(self.target)
            if self.day is not None:
                cols.append(self.day)
        return tuple(dict.fromkeys(cols))

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_picked",)

    @property
    def past_only(self) -> bool:
        return False  # a later record of the window can be the one picked

    def describe(self) -> str:
        words = f"true on one record per subject and visit {self.visit!r} among those where {self.col!r} is " \
                f"present: {RULE_WORDS[self.rule]}"
        if self.needs_target:
            words += f" (target {self.target!r})"
        if self.prefer is not None:
            words += f"; ties go to the {self.prefer} record"
        return words

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [pick_mask(panel, self, panel.columns.series(self.visit))]


def visit_codes(panel: Panel, visit: pd.Series) -> np.ndarray:
    """int64 codes of a visit column in sorted order (-1 where missing), any dtype."""
    codes, _ = pd.factorize(visit, use_na_sentinel=True)
    return panel.sort(np.asarray(codes, dtype=np.int64))


def pick_mask(panel: Panel, tr: VisitPick, visit: pd.Series, day: np.ndarray | None = None,
              target: np.ndarray | None = None) -> np.ndarray:
    """The picked rows (sorted order) for a configured pick; ``day``/``target`` may be given
    directly (sorted order) instead of read from columns."""
    eligible = ~panel.columns.missing(tr.col)
    value = panel.columns.numeric(tr.col) if tr.rule in ("max", "min") else None
    if tr.needs_target:
        if day is None:
            day = day_values(panel, tr.day, f"visit_pick rule={tr.rule!r}")
        if target is None:
            target = panel.columns.numeric(tr.target)
    return V.pick(panel.subjects, visit_codes(panel, visit), eligible, tr.rule, tr.prefer, value, day, target)


@checked_options
def visit_pick(
    col: str,
    rule: Literal["nearest", "first", "last", "max", "min", "last_on_or_before_target"],
    *,
    prefer: Literal["earlier", "later"] | None = None,
    visit: str = "visit_number",
    target: str = "visit_target",
    day: str | None = None,
    name: str | None = None,
) -> VisitPick:
    """True on exactly one record per (subject, visit) among the records where ``col`` is present.

    The visit is the column ``visit`` (by default ``visit_number``, made by
    :func:`panelfx.analysis_visit`; any column of visit codes works, such as a nominal visit
    from the case report form).  Rules:

    - ``"nearest"``: the record whose study day is nearest the target day (column ``target``);
    - ``"first"`` / ``"last"``: the earliest / latest record of the window;
    - ``"max"`` / ``"min"``: the record with the largest / smallest value of ``col``;
    - ``"last_on_or_before_target"``: the latest record on or before the target day (none
      when every record of the window is after it).

    ``prefer`` (``"earlier"`` or ``"later"``) breaks equal distances or equal values and is
    required by "nearest", "max" and "min", the rules where records can tie: analysis plans
    differ, so panelfx never chooses silently.  The other rules cannot tie and refuse it.
    Study days come from ``day`` (by default the time column, which must then hold
    numbers); "first"/"last" follow the time order.

    Missing values: records where ``col``, the visit (or, for target rules, the day or the
    target) is missing are never picked; a visit without such a record has no picked row.
    Not past-only (a later record of the window can be picked).  Output bool.  Default
    name: ``<col>_picked``.

    >>> import pandas as pd, panelfx as pfx
    >>> w = pfx.windows([("Week 2", 8, 21, 15), ("Week 4", 22, 35, 29)])
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1], "ady": [12, 18, 24, 30], "alt": [31.0, 40.0, None, 35.0]})
    >>> pfx.derive(df, pfx.analysis_visit(w), pfx.visit_pick("alt", "nearest", prefer="later"),
    ...            id="pid", time="ady")[["ady", "alt", "visit", "visit_distance", "alt_picked"]]
       ady   alt   visit  visit_distance  alt_picked
    0   12  31.0  Week 2             3.0       False
    1   18  40.0  Week 2             3.0        True
    2   24   NaN  Week 4             5.0       False
    3   30  35.0  Week 4             1.0        True
    """
    return VisitPick(col=col, rule=rule, prefer=prefer, visit=visit, target=target, day=day, name=name)
