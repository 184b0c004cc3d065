"""The planned-windows form of :func:`panelfx.plot.visit_schedule` (study days on the x axis)."""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._check_visits import window_findings
from ._panel import Panel
from .errors import OptionError
from .transforms.analysis_visit import day_values
from .visit_windows import Windows
from .visit_windows import windows as make_windows

#: Fill colours of the window bands, alternating.
BAND_COLOURS = ("#dbe8f5", "#eef3f9")


def draw(ax: Any, frame: pd.DataFrame, panel: Panel, chosen: np.ndarray, keys: list[Hashable], windows: Any,
         day: str | None, markers: dict[str, tuple[str, str, str]], lookup: Any) -> None:
    """Bands for the windows, each drawn subject's days, and check's findings on top."""
    from matplotlib.transforms import blended_transform_factory

    from .check import _rows

    w = windows if isinstance(windows, Windows) else make_windows(windows)
    d = day_values(panel, day, "visit_schedule(windows=...)")
    lows, highs, targets = w.bounds()
    seen = d[~np.isnan(d)]
    left = float(min(seen.min(initial=np.inf), targets.min()))
    right = float(max(seen.max(initial=-np.inf), targets.max()))
    top = blended_transform_factory(ax.transData, ax.transAxes)
    for k, label in enumerate(w.labels):
        lo = lows[k] if np.isfinite(lows[k]) else left
        hi = highs[k] if np.isfinite(highs[k]) else right
        band = ax.axvspan(lo, hi, color=BAND_COLOURS[k % 2], zorder=0, lw=0)
        band.set_gid(f"window:{label}")
        ax.axvline(targets[k], color="#7a9cc6", lw=0.6, zorder=0.5).set_gid(f"target:{label}")
        ax.text(targets[k], 1.005, label, transform=top, ha="center", va="bottom", fontsize=6, rotation=30)
    for row, g in enumerate(chosen):
        dd = d[panel.starts[g]:panel.ends[g]]
        (line,) = ax.plot(dd, np.full(len(dd), row), "-", color="0.7", lw=0.6, marker="o", ms=3.0,
                          mfc="0.35", mec="0.35")
        line.set_gid("subject")
    id_cols = panel.id_cols

    def rows(pos: np.ndarray, problem: str, detail: Any) -> pd.DataFrame:
        return _rows(frame, id_cols, panel.time_col, pos, problem, detail)

    parts = window_findings(panel, np.arange(panel.n), rows, windows=w, day=day)
    if not parts:
        return
    report = pd.concat([part.astype(object) for part in parts], ignore_index=True)  # as check() joins them
    where = lookup(keys, report["id"].tolist())
    report, where = report[where >= 0], where[where >= 0]
    for problem, (marker, colour, text) in markers.items():
        mask = (report["problem"] == problem).to_numpy() & report["_day"].notna().to_numpy()
        if mask.any():
            (pts,) = ax.plot(report["_day"].to_numpy(dtype=float)[mask], where[mask], linestyle="none",
                             marker=marker, color=colour, ms=7, mew=1.6, label=f"{text} ({int(mask.sum())})")
            pts.set_gid(f"problem:{problem}")
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7, frameon=False)


def check_options(windows: Any, spacing: Any, tolerance: Any, report: Any, day: str | None) -> None:
    if windows is None:
        if day is not None:
            raise OptionError("day= (a column of study days) goes with windows=")
        return
    if spacing is not None or tolerance is not None or report is not None:
        raise OptionError("give windows= alone (not with spacing=, tolerance= or report=)")


__all__: Sequence[str] = ["draw", "check_options"]
