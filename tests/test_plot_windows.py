"""plot.visit_schedule with windows: bands for the planned windows, findings of check(windows=) on top."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from panelfx import plot  # noqa: E402

W = pfx.windows([("Baseline", None, 1, 1), ("Week 4", 22, 36, 29), ("Week 12", 78, 92, 85)])


@pytest.fixture(autouse=True)
def _close():
    yield
    plt.close("all")


def frame() -> pd.DataFrame:
    # pid 1: on time; pid 2 misses Week 4 and comes to Week 12 on day 95 (late); pid 3 has two Week-4 visits
    return pd.DataFrame({"pid": [1, 1, 1, 2, 2, 3, 3, 3], "ady": [1, 29, 85, -3, 95, 1, 25, 30],
                         "when": pd.date_range("2024-01-01", periods=8)})


def span(patch) -> tuple[float, float]:
    """x extent of an axvspan (a Rectangle in newer matplotlib, a Polygon in older ones)."""
    if hasattr(patch, "get_width"):
        return patch.get_x(), patch.get_x() + patch.get_width()
    xs = patch.get_xy()[:, 0]
    return xs.min(), xs.max()


def test_bands_and_markers_at_study_days():
    ax = plot.visit_schedule(frame(), id="pid", time="ady", windows=W, subjects=None)
    bands = {p.get_gid(): p for p in ax.patches if str(p.get_gid()).startswith("window:")}
    assert list(bands) == ["window:Baseline", "window:Week 4", "window:Week 12"]
    assert span(bands["window:Week 4"]) == (22, 36)
    assert span(bands["window:Baseline"]) == (-3, 1)  # open low end: from the earliest day
    marks = {ln.get_gid(): ln.get_xydata().tolist() for ln in ax.get_lines() if str(ln.get_gid()).startswith("problem")}
    # rows: pid 1 -> 0, pid 2 -> 1, pid 3 -> 2; a missed visit sits at its target day
    assert marks == {"problem:missed": [[29, 1], [85, 1]], "problem:late": [[95, 1]], "problem:extra": [[25, 2]]}
    report = pfx.check(frame(), id="pid", time="ady", windows=W)
    assert sorted(report["problem"].value_counts().items()) == [("extra", 1), ("late", 1), ("missed", 2)]
    subjects = [ln for ln in ax.get_lines() if ln.get_gid() == "subject"]
    np.testing.assert_array_equal(subjects[2].get_xdata(), [1, 25, 30])


def test_study_day_column_on_datetime_times_and_option_checks():
    ax = plot.visit_schedule(frame(), id="pid", time="when", windows=W, day="ady", subjects=[3])
    assert ax.get_xlabel() == "ady"
    assert [ln.get_gid() for ln in ax.get_lines() if str(ln.get_gid()).startswith("problem")] == ["problem:extra"]
    with pytest.raises(pfx.OptionError, match="windows= alone"):
        plot.visit_schedule(frame(), id="pid", time="ady", windows=W, spacing=30)
    with pytest.raises(pfx.OptionError, match="goes with windows="):
        plot.visit_schedule(frame(), id="pid", time="ady", day="ady")
    with pytest.raises(pfx.OptionError, match="needs day="):
        plot.visit_schedule(frame(), id="pid", time="when", windows=W)
