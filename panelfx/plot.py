"""Figures for a long-format panel: subject trajectories and the visit schedule.

matplotlib is optional (``pip install 'panelfx[plot]'``) and imported only when a
function here is called.  Both functions draw a seeded sample of subjects (a few dozen
at most: one line per subject is drawn) on ``ax`` or on a new figure, and return the
matplotlib ``Axes``.
"""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._panel import Panel
from .errors import OptionError

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes

#: Markers of the schedule problems found by :func:`panelfx.check`: (marker, colour, legend text).
PROBLEM_MARKERS: dict[str, tuple[str, str, str]] = {
    "missed": ("x", "tab:red", "missed (planned time)"),
    "early": ("<", "tab:blue", "early"),
    "late": (">", "tab:orange", "late"),
    "extra": ("+", "tab:purple", "extra visit"),
    "duplicate": ("D", "black", "duplicate (id, time)"),
}


def _matplotlib() -> Any:
    try:
        import matplotlib
    except ImportError as err:  # pragma: no cover - exercised only without matplotlib
        raise ImportError(
            "panelfx.plot needs matplotlib, an optional dependency: pip install 'panelfx[plot]'"
        ) from err
    return matplotlib


def _axes(ax: Any) -> Any:
    if ax is not None:
        return ax
    _matplotlib()
    import matplotlib.pyplot as plt

    _, ax = plt.subplots(figsize=(8, 4.5))
    return ax


def _choose(panel: Panel, subjects: int | Sequence[Hashable] | None, seed: int) -> np.ndarray:
    """Subject numbers (panel order) to draw: a seeded sample of ``subjects`` of them, all of
    them for ``None``, or the subjects whose ids are listed (tuples for several id columns)."""
    n = panel.n_subjects
    if subjects is None:
        return np.arange(n)
    if isinstance(subjects, (int, np.integer)) and not isinstance(subjects, bool):
        if subjects < 1:
            raise OptionError(f"subjects must be a positive number or a list of ids, got {subjects!r}")
        rng = np.random.default_rng(seed)
        return np.sort(rng.choice(n, size=min(int(subjects), n), replace=False))
    if isinstance(subjects, (str, bytes)) or not isinstance(subjects, Sequence):
        raise OptionError(f"subjects must be a positive number or a list of ids, got {subjects!r}")
    where = _lookup(_keys(panel, np.arange(n)), list(subjects))
    if (where < 0).any():
        missing = [s for s, w in zip(subjects, where) if w < 0][:5]
        raise OptionError(f"subjects not in the frame: {missing}")
    return where


def _keys(panel: Panel, groups: np.ndarray) -> list[Hashable]:
    """Subject ids of subject numbers ``groups``: values, or tuples for several id columns
    (the same form as the ``id`` column of :func:`panelfx.check`'s report)."""
    pos = panel.original_positions(panel.starts[groups])
    cols = [panel.frame[c].iloc[pos].tolist() for c in panel.id_cols]
    return cols[0] if len(cols) == 1 else list(zip(*cols))


def _date_axis(ax: Any, panel: Panel) -> None:
    """Short date labels that do not run into each other on a datetime time axis."""
    if panel.time_kind == "datetime":
        import matplotlib.dates as mdates

        locator = mdates.AutoDateLocator(maxticks=8)
        ax.xaxis.set_major_locator(locator)
        ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))


def _sorted_time(panel: Panel) -> np.ndarray:
    return panel.sort(panel.frame[panel.time_col].to_numpy())


def trajectories(
    frame: pd.DataFrame,
    col: str,
    *,
    id: str | Sequence[str],
    time: str,
    subjects: int | Sequence[Hashable] | None = 20,
    overlay: str | None = None,
    seed: int = 0,
    ax: Axes | None = None,
) -> Axes:
    """One thin line per subject: ``col`` against ``time`` for a seeded sample of subjects.

    ``subjects`` is how many to draw (a sample drawn with ``seed``), ``None`` for all, or
    a list of subject ids (tuples for several id columns).  Missing values of ``col`` are
    skipped, so each line joins the subject's observed values.  ``overlay`` names another
    column (typically a derived one, e.g. a baseline or a rolling mean) drawn dashed in
    the same colour.  Lines carry the subject id as their label.

    >>> import matplotlib; matplotlib.use("Agg")
    >>> import matplotlib.pyplot as plt, pandas as pd
    >>> df = pd.DataFrame({"pid": [1, 1, 2, 2], "day": [0, 30, 0, 30], "sbp": [150.0, 141.0, 160.0, None]})
    >>> ax = trajectories(df, "sbp", id="pid", time="day")
    >>> [line.get_label() for line in ax.get_lines()]
    ['1', '2']
    >>> plt.close("all")
    """
    ax = _axes(ax)
    panel = Panel(frame, id=id, time=time, strict=False)
    chosen = _choose(panel, subjects, seed)
    t = _sorted_time(panel)
    y = panel.columns.numeric(col)
    z = panel.columns.numeric(overlay) if overlay is not None else None
    for g, key in zip(chosen, _keys(panel, chosen)):
        rows = slice(panel.starts[g], panel.ends[g])
        tt, yy = t[rows], y[rows]
        ok = ~np.isnan(yy)
        (line,) = ax.plot(tt[ok], yy[ok], "-", lw=0.9, marker="o", ms=2.0, alpha=0.8, label=_label(key))
        line.set_gid("trajectory")
        if z is not None:
            zz = z[rows]
            okz = ~np.isnan(zz)
            (dash,) = ax.plot(tt[okz], zz[okz], "--", lw=1.1, color=line.get_color(), label=f"{_label(key)} {overlay}")
            dash.set_gid("overlay")
    _date_axis(ax, panel)
    ax.set_xlabel(time)
    ax.set_ylabel(col)
    ax.set_title(f"{col}: {len(chosen)} of {panel.n_subjects} subjects"
                 + (f" (dashed: {overlay})" if overlay is not None else ""))
    return ax


def visit_schedule(
    frame: pd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    spacing: Any = None,
    tolerance: Any = None,
    report: pd.DataFrame | None = None,
    subjects: int | Sequence[Hashable] | None = 40,
    seed: int = 0,
    ax: Axes | None = None,
    windows: Any = None,
    day: str | None = None,
) -> Axes:
    """One horizontal row of occasion markers per subject along the time axis.

    With ``spacing`` (and optionally ``tolerance``), :func:`panelfx.check` is run and its
    ``missed``, ``early``, ``late``, ``extra`` and ``duplicate`` findings for the drawn
    subjects are marked on top, one marker style per problem, with a legend; a missed
    occasion is drawn at its planned time.  Pass a ``report`` made earlier by
    :func:`panelfx.check` instead to reuse it.  ``subjects`` as in :func:`trajectories`.
    Subject rows carry the gid ``"subject"``, problem markers ``"problem:<name>"``.

    With ``windows`` (a :func:`panelfx.windows` value) the x axis is the study day (the
    ``day`` column, or the time column when it holds numbers): each planned window is drawn
    as a band (gid ``"window:<label>"``) with its target as a thin line and its label on
    top, and the findings of ``check(..., windows=)`` are marked, a missed visit at its
    target day.

    >>> import matplotlib; matplotlib.use("Agg")
    >>> import matplotlib.pyplot as plt, pandas as pd
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 90, 0, 42]})
    >>> ax = visit_schedule(df, id="pid", time="day", spacing=30)
    >>> sorted(line.get_gid() for line in ax.get_lines())
    ['problem:late', 'problem:missed', 'subject', 'subject']
    >>> plt.close("all")
    """
    from . import _plot_windows

    _plot_windows.check_options(windows, spacing, tolerance, report, day)
    if report is not None and (spacing is not None or tolerance is not None):
        raise OptionError("give either report= or spacing=/tolerance= (to run panelfx.check), not both")
    if tolerance is not None and spacing is None:
        raise OptionError("tolerance= needs spacing= (the planned interval between occasions)")
    ax = _axes(ax)
    panel = Panel(frame, id=id, time=time, strict=False)
    chosen = _choose(panel, subjects, seed)
    keys = _keys(panel, chosen)
    if windows is not None:
        _plot_windows.draw(ax, frame, panel, chosen, keys, windows, day, PROBLEM_MARKERS, _lookup)
        ax.set_yticks(np.arange(len(chosen)))
        ax.set_yticklabels([_label(k) for k in keys], fontsize=6 if len(chosen) > 20 else 8)
        ax.set_ylim(len(chosen) - 0.5, -0.5)
        ax.set_xlabel(day if day is not None else f"{time} (study day)")
        ax.set_ylabel("subject")
        ax.set_title(f"visits of {len(chosen)} of {panel.n_subjects} subjects in planned windows", pad=22)
        return ax
    t = _sorted_time(panel)
    for row, g in enumerate(chosen):
        tt = t[panel.starts[g]:panel.ends[g]]
        (line,) = ax.plot(tt, np.full(len(tt), row), "-", color="0.7", lw=0.6, marker="o", ms=3.0,
                          mfc="0.35", mec="0.35")
        line.set_gid("subject")
    ax.set_yticks(np.arange(len(chosen)))
    ax.set_yticklabels([_label(k) for k in keys], fontsize=6 if len(chosen) > 20 else 8)
    ax.set_ylim(len(chosen) - 0.5, -0.5)
    _date_axis(ax, panel)
    ax.set_xlabel(time)
    ax.set_ylabel("subject")

    if report is None and spacing is not None:
        from .check import check

        report = check(frame, id=panel.id_cols if len(panel.id_cols) > 1 else panel.id_cols[0], time=time,
                       spacing=spacing, tolerance=tolerance)
    if report is not None and len(report):
        shown = report[report["problem"].isin(list(PROBLEM_MARKERS))]
        where = _lookup(keys, shown["id"].tolist())
        shown, where = shown[where >= 0], where[where >= 0]
        when = _times(shown["time"], panel)
        for problem, (marker, colour, text) in PROBLEM_MARKERS.items():
            mask = (shown["problem"] == problem).to_numpy()
            if mask.any():
                (pts,) = ax.plot(when[mask], where[mask], linestyle="none", marker=marker, color=colour,
                                 ms=7, mew=1.6, label=f"{text} ({int(mask.sum())})")
                pts.set_gid(f"problem:{problem}")
        if ax.get_legend_handles_labels()[0]:
            # outside the plot, so that it hides no subject's row
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7, frameon=False)
    title = f"visits of {len(chosen)} of {panel.n_subjects} subjects"
    if spacing is not None:
        title += f" (planned every {spacing})"
    ax.set_title(title)
    return ax


def _lookup(keys: list[Hashable], wanted: list[Hashable]) -> np.ndarray:
    """Position of each wanted subject id among ``keys`` (-1 when absent); tuples stay whole."""
    index = pd.Index(keys, dtype=object, tupleize_cols=False)
    return index.get_indexer(pd.Index(wanted, dtype=object, tupleize_cols=False))


def _times(values: pd.Series, panel: Panel) -> np.ndarray:
    """The report's ``time`` values (objects) in the time column's own type, for plotting."""
    if panel.time_kind == "number":
        return pd.to_numeric(pd.Series(list(values), dtype=object)).to_numpy(dtype="float64")
    if panel.time_kind == "timedelta":
        return pd.to_timedelta(list(values)).to_numpy()
    # Timestamps keep their zone; matplotlib places aware and naive ones alike.
    return pd.Series(list(values), dtype=panel.frame[panel.time_col].dtype).to_numpy()


def _label(key: Hashable) -> str:
    return " ".join(str(k) for k in key) if isinstance(key, tuple) else str(key)


__all__ = ["trajectories", "visit_schedule", "PROBLEM_MARKERS"]
