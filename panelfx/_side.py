"""Side tables of episodes (event times, other measurement streams) on the episodes' clock.

A side table holds the panel's id columns and a column of times.  Its records are matched
to the panel's subjects by :class:`~panelfx._tables.SideTable` (the same validation as
``derive(..., tables=)``) and put in (subject, time) order on the exact clock that
:func:`panelfx.episodes` compares every time on.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ._clock import Clock
from ._panel import Panel, require_columns
from ._tables import SideTable
from .errors import DuplicateOccasionError, MissingColumnError, NullKeyError, OptionError, rows_message

__all__ = ["SideRows", "side_rows", "side_time_column"]


@dataclass(frozen=True, eq=False)
class SideRows:
    """Rows of a side table whose subject is in the frame, in (subject, time) order."""

    table: pd.DataFrame
    grp: np.ndarray  # subject number in the frame's panel, per sorted row
    t: np.ndarray  # times on the clock, sorted within subject
    pos: np.ndarray  # the table's own positions of the sorted rows
    unknown: np.ndarray  # table positions of rows whose subject is not in the frame


def side_time_column(table: pd.DataFrame, id_cols: Sequence[str], time: str, what: str) -> str:
    """The column of times of a side table: the frame's time column name when present, else
    the one column besides the ids."""
    if not isinstance(table, pd.DataFrame):
        raise OptionError(f"{what} must be a pandas DataFrame, got {type(table).__name__}")
    require_columns(table, id_cols, f"{what}: id")
    if time in table.columns:
        return time
    rest = [c for c in table.columns if c not in id_cols]
    if len(rest) == 1:
        return str(rest[0])
    raise MissingColumnError(f"{what} has no column {time!r} (the time column's name) and not exactly one column "
                             f"besides the ids to use instead (columns: {list(table.columns)[:20]})",
                             column=time, count=1)


def side_rows(table: pd.DataFrame, tcol: str, panel: Panel, clock: Clock, what: str, *,
              unique: bool = True) -> SideRows:
    """Match ``table`` to the panel's subjects and sort it; missing ids or times are errors,
    and so are repeated (subject, time) pairs when ``unique``."""
    empty = np.zeros(0, dtype=np.int64)
    if len(table) == 0:
        return SideRows(table, empty, clock.read(table[tcol])[0], empty, empty)
    codes = SideTable(what, table, panel).psub  # panel subject of each record, -1 when absent
    t, missing = clock.read(table[tcol])
    if missing.any():
        bad = np.flatnonzero(missing)
        labels = list(table.index[bad[:5]])
        raise NullKeyError(rows_message(f"{what}: missing time", tcol, len(bad), labels, noun="row labels"),
                           column=tcol, count=len(bad), ids=labels)
    known = codes >= 0
    unknown = np.flatnonzero(~known)
    rows = np.flatnonzero(known)
    order = rows[np.lexsort((t[rows], codes[rows]))]
    grp, ts = codes[order], t[order]
    if unique and len(order) > 1:
        rep = (grp[1:] == grp[:-1]) & (ts[1:] == ts[:-1])
        if rep.any():
            where = order[1:][rep]
            ids = _ids(table, panel.id_cols, where)
            raise DuplicateOccasionError(rows_message(f"{what}: the same (id, time) more than once", tcol,
                                                      int(rep.sum()), ids), column=tcol, count=int(rep.sum()),
                                         ids=ids)
    return SideRows(table, grp, ts, order, unknown)


def _ids(table: pd.DataFrame, id_cols: Sequence[str], positions: np.ndarray) -> list[object]:
    cols = [table[c].iloc[positions[:100]].tolist() for c in id_cols]
    vals = cols[0] if len(cols) == 1 else list(zip(*cols))
    return list(dict.fromkeys(vals))[:5]
