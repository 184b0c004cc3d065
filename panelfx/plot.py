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
from .errors import MissingDependencyError, NotConstantError, OptionError

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
    except ImportError as err:
        raise MissingDependencyError(
            "panelfx.plot needs matplotlib, an optional dependency: pip install 'panelfx[plot]'", extra="plot"
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


# ---------------------------------------------------------------------------- profiles and groups
BANDS = ("ci", "sd")


def _segments(x: np.ndarray, y: np.ndarray, grp: np.ndarray) -> list[np.ndarray]:
    """One (k, 2) polyline per group of consecutive rows (rows already ordered), for a LineCollection."""
    if len(x) == 0:
        return []
    cuts = np.flatnonzero(grp[1:] != grp[:-1]) + 1
    return np.split(np.column_stack([x, y]), cuts)


def _faint(ax: Any, segments: list[np.ndarray], color: Any = "0.45", gid: str = "subjects") -> Any:
    from matplotlib.collections import LineCollection

    lines = LineCollection(segments, colors=[color], linewidths=0.6, alpha=0.18, zorder=1)
    lines.set_gid(gid)
    ax.add_collection(lines)
    ax.autoscale_view()
    return lines


def _plot_x(values: Any) -> np.ndarray:
    """Times as matplotlib takes them: numbers as float, datetimes as datetime64 (naive, local)."""
    s = pd.Series(values)
    if pd.api.types.is_datetime64_any_dtype(s.dtype):
        if getattr(s.dt, "tz", None) is not None:
            s = s.dt.tz_localize(None)
        return s.to_numpy(dtype="datetime64[ns]")
    if pd.api.types.is_timedelta64_dtype(s.dtype):
        return s.dt.total_seconds().to_numpy() / 86400.0
    return s.to_numpy(dtype=np.float64)


def profiles(
    frame: pd.DataFrame,
    col: str,
    *,
    id: str | Sequence[str],
    time: str,
    by: str | None = None,
    at: Sequence[Any] | None = None,
    every: Any = None,
    band: str = "ci",
    ncols: int = 3,
) -> Any:
    """Mean profile of ``col`` over time with a band, every subject drawn faintly, one panel
    per value of ``by`` (a column constant within subject; missing values form no panel).

    The mean at each grid time (``at`` or ``every`` as in :func:`panelfx.grid`; by default
    40 even steps over the observed times) is the mean over the subjects under follow-up
    then, each on its own straight-line trajectory (no extrapolation), so subjects who have
    left no longer count.  ``band="ci"``: mean +- 1.96 standard errors (a normal
    approximation, where at least two subjects count); ``"sd"``: mean +- one standard
    deviation.  Subjects are one faint line collection per panel (gid ``"subjects"``), the
    mean a line (gid ``"mean"``), the band a filled area (gid ``"band"``).  Returns the
    matplotlib Figure (``fig.axes``: one per panel).

    >>> import matplotlib; matplotlib.use("Agg")
    >>> import matplotlib.pyplot as plt, pandas as pd
    >>> df = pd.DataFrame({"pid": [1, 1, 2, 2], "day": [0, 10, 0, 10], "y": [1.0, 3.0, 3.0, 5.0]})
    >>> fig = profiles(df, "y", id="pid", time="day", at=[0, 5, 10])
    >>> [ln.get_ydata().tolist() for ln in fig.axes[0].get_lines() if ln.get_gid() == "mean"]
    [[2.0, 3.0, 4.0]]
    >>> plt.close("all")
    """
    from .grid import grid

    if band not in BANDS:
        raise OptionError(f"band must be one of {list(BANDS)}, got {band!r}")
    _matplotlib()
    import matplotlib.pyplot as plt

    panel = Panel(frame, id=id, time=time)
    if at is None and every is None:
        at = _even_times(panel)
    long = grid(frame, col, id=id, time=time, at=at, every=every)
    m = long[time].nunique()
    values = long[col].to_numpy().reshape(-1, m)  # subjects x grid times
    times = _plot_x(long[time].iloc[:m])
    groups: list[Any] = [None]
    member = np.zeros(panel.n_subjects, dtype=np.int64)
    if by is not None:
        if by in (time, col):
            raise OptionError(f"by={by!r} must be another column")
        codes, uniques = pd.factorize(panel.columns.series(by), sort=True)
        sorted_codes = panel.sort(np.asarray(codes))
        s = panel.subjects
        if panel.n and (np.minimum.reduceat(sorted_codes, s.starts) != np.maximum.reduceat(sorted_codes,
                                                                                          s.starts)).any():
            bad = np.flatnonzero(sorted_codes != sorted_codes[s.first])
            found = panel.ids_at(bad)
            raise NotConstantError(f"by column {by!r} varies within subject: first ids {found}", column=by,
                                   count=len(bad), ids=found)
        member = sorted_codes[s.starts] if panel.n else member
        groups = list(uniques)
    n_panels = len(groups)
    cols = max(1, min(int(ncols), n_panels))
    rows = -(-n_panels // cols)
    fig, axes = plt.subplots(rows, cols, figsize=(4.2 * cols, 3.4 * rows), sharey=True, squeeze=False)
    t_sorted = _plot_x(panel.sort(panel.frame[time].to_numpy()))
    y_sorted = panel.columns.numeric(col)
    ok = ~np.isnan(y_sorted)
    for k, (group, ax) in enumerate(zip(groups, axes.ravel())):
        mine = member == k if by is not None else np.ones(panel.n_subjects, dtype=bool)
        rows_in = ok & mine[panel.grp]
        _faint(ax, _segments(t_sorted[rows_in], y_sorted[rows_in], panel.grp[rows_in]))
        v = values[mine]
        count = (~np.isnan(v)).sum(axis=0)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(count > 0, np.nansum(v, axis=0) / np.maximum(count, 1), np.nan)
            sd = np.sqrt(np.where(count > 1, np.nansum((v - mean) ** 2, axis=0) / np.maximum(count - 1, 1), np.nan))
        half = 1.96 * sd / np.sqrt(count) if band == "ci" else sd
        (line,) = ax.plot(times, mean, color="tab:blue", lw=2.0, label="mean", zorder=3)
        line.set_gid("mean")
        fill = ax.fill_between(times, mean - half, mean + half, color="tab:blue", alpha=0.25, lw=0, zorder=2,
                               label="95% CI of the mean" if band == "ci" else "mean +- 1 SD")
        fill.set_gid("band")
        title = f"{col}: {int(mine.sum())} subjects"
        ax.set_title(title if by is None else f"{by} = {group} ({int(mine.sum())} subjects)", fontsize=9)
        ax.set_xlabel(time)
        if k % cols == 0:
            ax.set_ylabel(col)
    for ax in axes.ravel()[n_panels:]:
        ax.set_visible(False)
    axes.ravel()[0].legend(fontsize=7, loc="best", frameon=False)
    fig.tight_layout()
    return fig


def _even_times(panel: Panel, steps: int = 40) -> list[Any]:
    """``steps`` + 1 even grid times from the earliest to the latest time (the distinct
    times themselves when there are fewer)."""
    t = panel.frame[panel.time_col]
    distinct = pd.Series(t.unique()).dropna().sort_values()
    if len(distinct) <= steps + 1:
        return list(distinct)
    lo, hi = distinct.iloc[0], distinct.iloc[-1]
    if panel.time_kind == "number":
        return list(np.linspace(float(lo), float(hi), steps + 1))
    return list(pd.Series([lo + (hi - lo) * (i / steps) for i in range(steps + 1)]))


def within_between(
    frame: pd.DataFrame,
    x: str,
    y: str,
    *,
    id: str | Sequence[str],
    time: str,
    subjects: int | Sequence[Hashable] | None = None,
    seed: int = 0,
    ax: Axes | None = None,
) -> Axes:
    """The within/between picture: every occasion as a point, each subject's points joined
    by a short line, and two fitted slopes drawn through the mean point and labelled:

    - the pooled (cross-sectional) slope: least squares of ``y`` on ``x`` over all rows;
    - the average within-subject slope: least squares on the deviations from each
      subject's means (the fixed-effects slope, a weighted average of the subjects' own
      slopes).

    Only rows with both values count.  When the two differ, the association across people
    is not what changes within a person.  ``subjects`` (as in :func:`trajectories`, default
    all) limits the points and lines drawn to a seeded sample; the slopes use every subject.
    Points carry gid ``"points"``, subject lines ``"subjects"``, the slopes ``"pooled"`` and
    ``"within"`` (their labels give the values).

    >>> import matplotlib; matplotlib.use("Agg")
    >>> import matplotlib.pyplot as plt, pandas as pd
    >>> df = pd.DataFrame({"pid": [1, 1, 2, 2], "t": [0, 1, 0, 1], "x": [0.0, 1.0, 4.0, 5.0],
    ...                    "y": [0.0, -1.0, 8.0, 7.0]})
    >>> ax = within_between(df, "x", "y", id="pid", time="t")
    >>> [ln.get_label() for ln in ax.get_lines() if ln.get_gid() in ("pooled", "within")]
    ['pooled (cross-sectional) slope 1.82', 'average within-subject slope -1']
    >>> plt.close("all")
    """
    ax = _axes(ax)
    panel = Panel(frame, id=id, time=time)
    xs, ys = panel.columns.numeric(x), panel.columns.numeric(y)
    ok = ~np.isnan(xs) & ~np.isnan(ys)
    xv, yv, g = xs[ok], ys[ok], panel.grp[ok]
    if len(xv) < 2:
        raise OptionError(f"within_between needs at least two rows with both {x!r} and {y!r}")
    drawn = np.isin(g, _choose(panel, subjects, seed))
    xd, yd, gd = xv[drawn], yv[drawn], g[drawn]
    ax.scatter(xd, yd, s=7, color="0.35", alpha=0.55, zorder=2, gid="points")
    order = np.lexsort((xd, gd))  # each subject's points from left to right
    lines = _faint(ax, _segments(xd[order], yd[order], gd[order]), color="0.25")
    lines.set_alpha(0.45)
    xm, ym = xv.mean(), yv.mean()
    dx, dy = xv - xm, yv - ym
    pooled = float(dx @ dy / (dx @ dx))
    n = np.maximum(np.bincount(g), 1).astype(np.float64)
    wx = xv - (np.bincount(g, weights=xv) / n)[g]  # deviations from the subject's means
    wy = yv - (np.bincount(g, weights=yv) / n)[g]
    within = float(wx @ wy / (wx @ wx)) if (wx @ wx) > 0 else np.nan
    span = np.array([xv.min(), xv.max()])
    (a,) = ax.plot(span, ym + pooled * (span - xm), color="tab:red", lw=2.2, gid="pooled",
                   label=f"pooled (cross-sectional) slope {pooled:.3g}", zorder=4)
    (b,) = ax.plot(span, ym + within * (span - xm), color="tab:blue", lw=2.2, ls="--", gid="within",
                   label=f"average within-subject slope {within:.3g}", zorder=4)
    ax.legend(handles=[a, b], fontsize=8, loc="best", frameon=False)
    ax.set_xlabel(x)
    ax.set_ylabel(y)
    shown = len(np.unique(gd))
    ax.set_title(f"{y} on {x}: {shown} of {panel.n_subjects} subjects drawn, points joined within subject; "
                 f"slopes from all", fontsize=9)
    return ax


def trajectory_groups(
    wide: pd.DataFrame,
    labels: Any,
    *,
    ax: Axes | None = None,
) -> Axes:
    """Trajectory groups after clustering: each subject's row of a subject x time matrix
    (:func:`panelfx.grid` with ``shape="wide"``) drawn faintly in its group's colour, and
    the group's mean curve (the mean over its subjects at each time, missing values left
    out) bold, labelled with the group and its number of subjects.

    ``labels``: one group label per row of ``wide`` (a list or array in row order, or a
    Series indexed like ``wide``).  Subject lines carry gid ``"subjects:<group>"``, mean
    curves ``"mean:<group>"``.

    >>> import matplotlib; matplotlib.use("Agg")
    >>> import matplotlib.pyplot as plt, pandas as pd
    >>> wide = pd.DataFrame([[0.0, 1.0], [0.0, 3.0], [5.0, 5.0]], columns=[0, 10])
    >>> ax = trajectory_groups(wide, ["a", "a", "b"])
    >>> [(ln.get_label(), ln.get_ydata().tolist()) for ln in ax.get_lines()]
    [('a (n = 2)', [0.0, 2.0]), ('b (n = 1)', [5.0, 5.0])]
    >>> plt.close("all")
    """
    if not isinstance(wide, pd.DataFrame):
        raise TypeError(f"expected the wide frame of panelfx.grid(..., shape='wide'), got {type(wide).__name__}")
    if isinstance(labels, pd.Series):
        lab = labels.reindex(wide.index)
        if lab.isna().any() and not labels.isna().any():
            raise OptionError("labels (a Series) must be indexed like the wide frame's rows")
        lab_values = lab.to_numpy()
    else:
        lab_values = np.asarray(labels, dtype=object)
    if len(lab_values) != len(wide):
        raise OptionError(f"labels has {len(lab_values)} entries for {len(wide)} rows of the wide frame")
    if isinstance(wide.columns, pd.MultiIndex):
        raise OptionError("draw one value column at a time: select it first, e.g. wide['walk_m']")
    ax = _axes(ax)
    times = _plot_x(wide.columns.to_numpy())
    values = wide.to_numpy(dtype=np.float64)
    codes, groups = pd.factorize(pd.Series(lab_values), sort=True)
    import matplotlib.pyplot as plt

    colours = plt.rcParams["axes.prop_cycle"].by_key().get("color", ["C0"])
    for k, group in enumerate(groups):
        mine = values[codes == k]
        colour = colours[k % len(colours)]
        segs = [np.column_stack([times, row]) for row in mine]  # one row per subject of the group
        _faint(ax, segs, color=colour, gid=f"subjects:{group}")
        count = (~np.isnan(mine)).sum(axis=0)
        with np.errstate(invalid="ignore"):
            mean = np.where(count > 0, np.nansum(mine, axis=0) / np.maximum(count, 1), np.nan)
        ax.plot(times, mean, color=colour, lw=2.4, gid=f"mean:{group}", label=f"{group} (n = {len(mine)})",
                zorder=3)
    ax.legend(fontsize=8, loc="best", frameon=False, title="group")
    ax.set_xlabel(str(wide.columns.name or "time"))
    ax.set_title(f"{len(groups)} trajectory groups, {len(wide)} subjects (bold: group mean)", fontsize=9)
    return ax


__all__ = ["trajectories", "visit_schedule", "PROBLEM_MARKERS", "profiles", "within_between", "trajectory_groups"]
