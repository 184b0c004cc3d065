"""Study day: the day number of each occasion relative to the subject's reference date."""

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
from ..errors import ColumnTypeError, TimeTypeError, rows_message

CONVENTIONS = ("no_day_0", "offset")


@dataclasses.dataclass(frozen=True, kw_only=True)
class StudyDay(Transform):
    """Configured :func:`study_day`."""

    type_name = "study_day"
    reference: str
    convention: Literal["no_day_0", "offset"] = "no_day_0"
    date: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("reference", self.reference)
        check_choice("convention", self.convention, CONVENTIONS)
        if self.date is not None:
            check_column_name("date", self.date)
        check_name(self.name)

    def inputs(self) -> tuple[str, ...]:
        return (self.reference,) if self.date is None else (self.reference, self.date)

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        return ("study_day",) if self.date is None else (f"{self.date}_study_day",)

    @property
    def past_only(self) -> bool:
        return True  # the row's own date and its subject's reference, nothing else

    def describe(self) -> str:
        what = "the occasion's date" if self.date is None else f"the date in {self.date!r}"
        if self.convention == "no_day_0":
            return (f"study day of {what}: day 1 on the reference date in {self.reference!r}, day -1 the day "
                    f"before (no day 0); dates taken as calendar dates in their own time zone")
        return f"days from the reference date in {self.reference!r} to {what} (0 on the reference date)"

    def compute(self, panel: Panel) -> Sequence[Any]:
        date_col = panel.time_col if self.date is None else self.date
        kind, d, d_missing = V.calendar_days(panel.columns.series(date_col))
        rkind, r, r_missing = V.calendar_days(panel.columns.series(self.reference))
        if (kind == "number") != (rkind == "number"):
            raise TimeTypeError(f"reference column {self.reference!r} holds {rkind} values but {date_col!r} "
                                f"holds {kind} values: give both as dates or both as numbers",
                                column=self.reference)
        d, d_missing = panel.sort(d), panel.sort(d_missing)
        r, r_missing = panel.sort(r), panel.sort(r_missing)
        V.subject_reference(r, r_missing, panel.subjects, self.reference, panel.ids_at)  # constant, or an error
        missing = d_missing | r_missing
        if kind == "number":
            if self.convention == "no_day_0":
                is_whole = missing | ((d == np.floor(d)) & (r == np.floor(r)))
                if not is_whole.all():
                    where = np.flatnonzero(~is_whole)
                    col = date_col if (d[where[0]] != np.floor(d[where[0]])) else self.reference
                    raise ColumnTypeError(
                        rows_message("convention='no_day_0' counts whole days but these are not whole numbers "
                                     "(use convention='offset' for other units)", col, len(where),
                                     panel.ids_at(where)), column=col, count=len(where))
            with np.errstate(invalid="ignore"):
                out = d - r
        else:
            out = (d - r).astype(np.float64)
        if self.convention == "no_day_0":
            out = out + (out >= 0)  # day 1 on the reference date: no day 0
        out[missing] = np.nan
        whole = kind != "number" or all(pd.api.types.is_integer_dtype(panel.columns.series(c).dtype)
                                        for c in (date_col, self.reference))
        if whole and not missing.any():
            return [out.astype(np.int64)]
        return [out]


@checked_options
def study_day(
    reference: str,
    convention: Literal["no_day_0", "offset"] = "no_day_0",
    *,
    date: str | None = None,
    name: str | None = None,
) -> StudyDay:
    """The study day of each occasion: its date counted from the subject's reference date.

    ``reference`` names a column of dates (or numbers) constant within subject, such as the
    date of randomisation or first dose.  With ``convention="no_day_0"`` (the default, the
    convention of CDISC SDTM/ADaM submission data) the reference date is day 1, the day
    before it day -1, and there is no day 0.  ``convention="offset"`` simply subtracts
    (day 0 on the reference date), as registries and numeric times usually do.

    Datetimes are taken as calendar dates in their own time zone (an aware timestamp counts
    on the date its own clock shows; the time of day never matters).  Timedeltas count
    whole days.  Numbers are subtracted as they are (``"no_day_0"`` needs whole numbers).
    ``date`` names another column of dates to count instead of the time column (the date of
    an adverse event, say).

    Missing values: missing where the date or the reference is missing.  The non-missing
    references of a subject must agree (a :class:`~panelfx.NotConstantError` otherwise).  Past-only.  Output int64
    (float64 where a day is missing, or for fractional numbers).  Default name:
    ``study_day`` (``<date>_study_day`` with ``date``).

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2],
    ...                    "visit": pd.to_datetime(["2024-03-09", "2024-03-10", "2024-04-09", "2024-05-01"]),
    ...                    "rand": pd.to_datetime(["2024-03-10"] * 3 + ["2024-05-01"])})
    >>> pfx.derive(df, pfx.study_day("rand"), pfx.study_day("rand", "offset", name="days"),
    ...            id="pid", time="visit")
       pid      visit       rand  study_day  days
    0    1 2024-03-09 2024-03-10         -1    -1
    1    1 2024-03-10 2024-03-10          1     0
    2    1 2024-04-09 2024-03-10         31    30
    3    2 2024-05-01 2024-05-01          1     0
    """
    return StudyDay(reference=reference, convention=convention, date=date, name=name)
