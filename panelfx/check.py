"""``check``: a tidy report of the panel's structural problems, one row per finding."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._check_visits import planned_findings, window_findings
from ._frames import frames
from ._interval_check import interval_findings
from ._options import checked_options
from ._panel import Panel, as_id_list, require_columns, time_kind
from .errors import OptionError

#: Columns of the report, in order.
REPORT_COLUMNS = ["problem", "severity", "id", "row", "time", "detail"]

#: problem -> severity.  "fatal" problems make :func:`panelfx.derive` refuse the frame.
PROBLEMS = {
    "null_id": "fatal",
    "null_time": "fatal",
    "duplicate": "fatal",
    "missed": "warning",
    "early": "warning",
    "late": "warning",
    "extra": "warning",
    "no_day": "warning",
    "interval_data": "warning",
    "single_occasion": "note",
    "not_in_order": "note",
}


@checked_options
@frames(struct_names=lambda a: {"id": as_id_list(a["id"])})
def check(
    frame: pd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    spacing: Any = None,
    tolerance: Any = None,
    notes: bool = False,
    order: str | None = None,
    schedule: Sequence[Any] | None = None,
    windows: Any = None,
    day: str | None = None,
) -> pd.DataFrame:
    """Report structural problems of a long-format panel; an empty frame when all is well.

    One row per finding with columns ``problem``, ``severity`` (``fatal``, ``warning`` or
    ``note``), ``id`` (the subject id; a tuple when ``id`` names several columns), ``row``
    (the row label; missing for a scheduled occasion that has no row), ``time`` and
    ``detail``.  Problems:

    - ``null_id``, ``null_time``: a missing id or time (fatal);
    - ``duplicate``: more than one row for the same (id, time), every such row (fatal);
    - with ``spacing`` (the planned interval between occasions, counted from each
      subject's first occasion: a number, or a timedelta such as ``"30D"`` for datetimes),
      each occasion is matched to the nearest scheduled one (numbered 0 at the subject's
      first occasion, 1 one spacing later, ...): ``early`` / ``late`` when it
      is more than ``tolerance`` (default a quarter of ``spacing``) away from it,
      ``missed`` for each scheduled occasion between two visits that has no visit (its
      ``time`` is the planned time), ``extra`` for a second visit matched to the same
      scheduled occasion.  Scheduled occasions after a subject's last visit are not
      reported: the end of planned follow-up is not known here.  Each occasion goes to
      the nearest scheduled one (the earlier on a tie); of several matched to one, the
      nearest is the visit and the others are ``extra`` (never also early or late), so a
      visit is reported at most once.
    - ``order`` (a column that orders rows sharing a time, as in :func:`derive`): rows tied
      in time but told apart by it are not duplicates;
    - with ``schedule`` (planned times that need not be evenly spaced, counted from each
      subject's first occasion, e.g. ``[0, 182, 365, 730]`` days or ``["0D", "182D", ...]``
      for datetimes) and ``tolerance`` (one value, or one per planned time): the same
      findings as with ``spacing``; ``spacing=s`` is ``schedule=[0, s, 2s, ...]``.
    - with ``windows`` (a :func:`panelfx.windows` value in study days, read from ``day``
      or from the time column when it holds numbers): each occasion goes to the window
      that holds its day, exactly as :func:`panelfx.analysis_visit` assigns it; ``early``
      / ``late`` for one outside every window (against the nearest target), ``extra`` for
      one that shares a window with an occasion nearer the target, ``missed`` for a window that starts on or before the
      subject's last day (always the first window) with no occasion (``time`` is the target
      when the time column holds the study days), ``no_day`` where the day is missing.
      reported: the end of planned follow-up is not known here.
    - ``interval_data``: another column of times looks like the stop of (start, stop]
      intervals that begin at ``time`` (never before it, equal to the next row's time on most
      rows): events happen at the stop, so ``time=start`` is wrong for transforms of an event
      flag (warning, once per such column);
    - with ``notes=True`` also ``single_occasion`` subjects and ``not_in_order`` (once,
      when rows are not grouped by subject in time order; harmless for panelfx).

    Missing columns and a time column of text still raise, as in :func:`derive`.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 31, 95, 0, 0]})
    >>> pfx.check(df, id="pid", time="day", spacing=30, tolerance=4)
         problem severity  id   row  time                                          detail
    0  duplicate    fatal   2     3     0                    2 rows share this (id, time)
    1  duplicate    fatal   2     4     0                    2 rows share this (id, time)
    2     missed  warning   1  None  60.0               scheduled occasion 2 has no visit
    3       late  warning   1     2    95  5.0 after scheduled occasion 3 (tolerance 4.0)
    """
    id_cols = as_id_list(id)
    require_columns(frame, [*id_cols, time], "id/time")
    time_kind(frame[time])
    parts: list[pd.DataFrame] = []

    null_id = np.zeros(len(frame), dtype=bool)
    for c in id_cols:
        null_id |= frame[c].isna().to_numpy()
    null_time = frame[time].isna().to_numpy()
    for problem, mask, text in (("null_id", null_id, "subject id is missing"),
                                ("null_time", null_time & ~null_id, "time is missing")):
        if mask.any():
            parts.append(_rows(frame, id_cols, time, np.flatnonzero(mask), problem, text))

    keep = ~(null_id | null_time)
    sub = frame if keep.all() else frame.loc[keep]
    panel = Panel(sub, id=id_cols, time=time, order=order, strict=False)
    positions = np.flatnonzero(keep)  # frame positions of sub's rows

    if notes and panel.ordering.order is not None:
        parts.append(_rows(frame, id_cols, time, positions[panel.original_positions(np.array([0]))],
                           "not_in_order", "rows are not grouped by subject in time order (panelfx sorts them)"))
    dup = panel.repeated.copy()
    dup[:-1] |= panel.repeated[1:]
    if dup.any():
        # number of rows sharing each duplicated time
        run = np.cumsum(~panel.repeated)
        counts = np.bincount(run)[run]
        where = np.flatnonzero(dup)
        detail = pd.Series(counts[where]).astype(str) + " rows share this (id, time)"
        parts.append(_rows(frame, id_cols, time, positions[panel.original_positions(where)], "duplicate", detail))

    plans = [k for k, v in (("spacing", spacing), ("schedule", schedule), ("windows", windows)) if v is not None]
    if len(plans) > 1:
        raise OptionError(f"give one of spacing=, schedule= or windows=, not {' and '.join(plans)}")
    if day is not None and windows is None:
        raise OptionError("day= (a column of study days) goes with windows=")

    def rows(pos: np.ndarray, problem: str, detail: Any) -> pd.DataFrame:
        return _rows(frame, id_cols, time, pos, problem, detail)

    if spacing is not None or schedule is not None:
        parts.extend(planned_findings(panel, positions, rows, spacing=spacing, schedule=schedule,
                                      tolerance=tolerance))
    elif windows is not None:
        if tolerance is not None:
            raise OptionError("tolerance= does not go with windows= (the windows hold their own bounds)")
        parts.extend(window_findings(panel, positions, rows, windows=windows, day=day))
    elif tolerance is not None:
        raise OptionError("tolerance= needs spacing= (the planned interval between occasions)")

    parts.extend(interval_findings(frame, panel, positions, id_cols, time, _rows))

    if notes:
        single = np.flatnonzero(panel.subjects.lengths == 1) if panel.n else np.array([], dtype=int)
        if len(single):
            pos = positions[panel.original_positions(panel.starts[single])]
            parts.append(_rows(frame, id_cols, time, pos, "single_occasion", "subject has one occasion only"))

    if not parts:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in REPORT_COLUMNS})
    # parts without a finding of some column (all missing) would decide the dtypes differently
    # across pandas versions: the report's columns hold objects anyway
    report = pd.concat([part.astype(object) for part in parts], ignore_index=True)
    rank = pd.Categorical(report["problem"], categories=list(PROBLEMS), ordered=True)
    report = report.assign(_o=rank.codes).sort_values(["_o"], kind="stable").drop(columns="_o")
    return report.reset_index(drop=True)[REPORT_COLUMNS]


def _ids(frame: pd.DataFrame, id_cols: Sequence[str], pos: np.ndarray) -> list[Any]:
    cols = [frame[c].iloc[pos].tolist() for c in id_cols]
    return cols[0] if len(cols) == 1 else list(zip(*cols))


def _rows(frame: pd.DataFrame, id_cols: Sequence[str], time: str, pos: np.ndarray, problem: str,
          detail: Any) -> pd.DataFrame:
    return pd.DataFrame({
        "problem": problem,
        "severity": PROBLEMS[problem],
        "id": _ids(frame, id_cols, pos),
        "row": frame.index[pos].to_numpy(dtype=object),
        "time": frame[time].iloc[pos].to_numpy(dtype=object),
        "detail": detail if isinstance(detail, str) else np.asarray(detail, dtype=object),
    })
