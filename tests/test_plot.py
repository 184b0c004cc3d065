"""panelfx.plot: the artists drawn, not only that drawing works."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.dates as mdates  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402

import panelfx as pfx  # noqa: E402
from panelfx import demo, plot  # noqa: E402
from panelfx.errors import OptionError  # noqa: E402

ID = ["site", "subject"]


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


@pytest.fixture(scope="module")
def cohort() -> pd.DataFrame:
    return demo.cohort(60, seed=3)


def lines(ax, gid):
    return [ln for ln in ax.get_lines() if ln.get_gid() == gid]


def small() -> pd.DataFrame:
    # pid 1 misses day 60; pid 2 comes 12 days late; pid 3 comes 10 days early;
    # pid 4 has a second visit matched to occasion 1.  Rows deliberately out of order.
    return pd.DataFrame({
        "pid": [1, 2, 1, 3, 1, 2, 3, 3, 4, 4, 4],
        "day": [90, 42, 0, 20, 30, 0, 0, 60, 0, 28, 33],
        "y": [1.0, 2.0, 3.0, np.nan, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0, 11.0],
    })


# --------------------------------------------------------------------- trajectories
def test_one_line_per_subject_with_its_observed_values(tmp_path):
    df = small()
    ax = plot.trajectories(df, "y", id="pid", time="day", subjects=None)
    traj = lines(ax, "trajectory")
    assert [ln.get_label() for ln in traj] == ["1", "2", "3", "4"]
    by_label = {ln.get_label(): ln for ln in traj}
    # sorted by time, missing value (pid 3, day 20) skipped
    np.testing.assert_array_equal(by_label["1"].get_xdata(), [0, 30, 90])
    np.testing.assert_array_equal(by_label["1"].get_ydata(), [3.0, 5.0, 1.0])
    np.testing.assert_array_equal(by_label["3"].get_xdata(), [0, 60])
    assert lines(ax, "overlay") == []
    assert ax.get_xlabel() == "day" and ax.get_ylabel() == "y"
    path = tmp_path / "t.png"
    ax.figure.savefig(path)
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert matplotlib.image.imread(path).ndim == 3


def test_seeded_sample_and_dashed_overlay(cohort, tmp_path):
    out = pfx.derive(cohort, pfx.baseline("sbp", rule="last_before", reference="treat_start"), id=ID, time="visit_date")
    before = out.copy()
    ax = plot.trajectories(out, "sbp", id=ID, time="day", subjects=7, overlay="sbp_baseline", seed=4)
    pd.testing.assert_frame_equal(out, before)  # the input is not touched
    traj, dashed = lines(ax, "trajectory"), lines(ax, "overlay")
    assert len(traj) == 7 and len(dashed) == 7
    for solid, dash in zip(traj, dashed):
        assert dash.get_linestyle() == "--" and solid.get_linestyle() == "-"
        assert dash.get_color() == solid.get_color()
        assert dash.get_label() == f"{solid.get_label()} sbp_baseline"
        assert len(set(dash.get_ydata())) == 1  # a baseline is flat within subject
    labels = [ln.get_label() for ln in traj]
    assert len(set(labels)) == 7
    again = plot.trajectories(out, "sbp", id=ID, time="day", subjects=7, seed=4)
    assert [ln.get_label() for ln in lines(again, "trajectory")] == labels
    other = plot.trajectories(out, "sbp", id=ID, time="day", subjects=7, seed=5)
    assert [ln.get_label() for ln in lines(other, "trajectory")] != labels
    assert "7 of 60 subjects" in ax.get_title()
    ax.figure.savefig(tmp_path / "overlay.png")
    assert (tmp_path / "overlay.png").stat().st_size > 1000


def test_subjects_by_id_and_on_a_given_axes(cohort):
    fig, ax = plt.subplots()
    wanted = [("Alder Row", 1), ("Brookfield", 1)]
    got = plot.trajectories(cohort, "sbp", id=ID, time="visit_date", subjects=wanted, ax=ax)
    assert got is ax
    assert [ln.get_label() for ln in lines(ax, "trajectory")] == ["Alder Row 1", "Brookfield 1"]
    first = (cohort["site"] == "Alder Row") & (cohort["subject"] == 1)
    n_obs = cohort.loc[first, "sbp"].notna().sum()
    assert len(lines(ax, "trajectory")[0].get_xdata()) == n_obs
    with pytest.raises(OptionError, match="not in the frame"):
        plot.trajectories(cohort, "sbp", id=ID, time="day", subjects=[("Nowhere", 1)])
    with pytest.raises(OptionError, match="subjects"):
        plot.trajectories(cohort, "sbp", id=ID, time="day", subjects=0)
    # more than there are: all of them
    assert len(lines(plot.trajectories(cohort, "sbp", id=ID, time="day", subjects=500), "trajectory")) == 60


# --------------------------------------------------------------------- visit schedule
def test_schedule_rows_and_flagged_occasions_at_the_right_place(tmp_path):
    df = small()
    ax = plot.visit_schedule(df, id="pid", time="day", spacing=30, subjects=None)
    rows = lines(ax, "subject")
    assert len(rows) == 4
    assert [t.get_text() for t in ax.get_yticklabels()] == ["1", "2", "3", "4"]
    np.testing.assert_array_equal(rows[0].get_xdata(), [0, 30, 90])
    np.testing.assert_array_equal(rows[3].get_ydata(), [3, 3, 3])
    marks = {ln.get_gid(): ln for ln in ax.get_lines() if ln.get_gid().startswith("problem:")}
    assert set(marks) == {"problem:missed", "problem:late", "problem:early", "problem:extra"}
    np.testing.assert_array_equal(marks["problem:missed"].get_xydata(), [[60, 0]])  # planned day 60, pid 1
    np.testing.assert_array_equal(marks["problem:late"].get_xydata(), [[42, 1]])
    np.testing.assert_array_equal(marks["problem:early"].get_xydata(), [[20, 2]])
    np.testing.assert_array_equal(marks["problem:extra"].get_xydata(), [[33, 3]])
    assert marks["problem:missed"].get_marker() != marks["problem:late"].get_marker()
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert legend == ["missed (planned time) (1)", "early (1)", "late (1)", "extra visit (1)"]
    ax.figure.savefig(tmp_path / "s.png")
    assert (tmp_path / "s.png").stat().st_size > 1000


def test_schedule_marker_counts_match_the_check_report(cohort):
    report = pfx.check(cohort, id=ID, time="visit_date", spacing="30D")
    ax = plot.visit_schedule(cohort, id=ID, time="visit_date", spacing="30D", subjects=None)
    assert len(lines(ax, "subject")) == 60
    counts = report["problem"].value_counts()
    assert len(counts) >= 3
    for problem, n in counts.items():
        (mark,) = lines(ax, f"problem:{problem}")
        assert len(mark.get_xdata()) == n
    # a missed occasion sits at its planned date, on its subject's row
    missed = report[report["problem"] == "missed"].iloc[0]
    (mark,) = lines(ax, "problem:missed")
    row = [t.get_text() for t in ax.get_yticklabels()].index(f"{missed['id'][0]} {missed['id'][1]}")
    assert (mdates.date2num(missed["time"]), row) in {tuple(p) for p in mark.get_xydata()}


def test_schedule_sample_keeps_only_the_drawn_subjects_findings(cohort):
    report = pfx.check(cohort, id=ID, time="visit_date", spacing="30D")
    ax = plot.visit_schedule(cohort, id=ID, time="visit_date", report=report, subjects=15, seed=2)
    drawn = {t.get_text() for t in ax.get_yticklabels()}
    assert len(drawn) == len(lines(ax, "subject")) == 15
    mine = report[report["id"].map(lambda k: f"{k[0]} {k[1]}").isin(drawn)]
    shown = {ln.get_gid(): len(ln.get_xdata()) for ln in ax.get_lines() if ln.get_gid().startswith("problem:")}
    assert shown == {f"problem:{p}": n for p, n in mine["problem"].value_counts().items()}


def test_schedule_without_spacing_marks_nothing_and_options_are_checked(cohort):
    ax = plot.visit_schedule(cohort, id=ID, time="visit_date", subjects=5)
    assert [ln.get_gid() for ln in ax.get_lines()] == ["subject"] * 5
    assert ax.get_legend() is None
    report = pfx.check(cohort, id=ID, time="visit_date", spacing="30D")
    with pytest.raises(OptionError, match="not both"):
        plot.visit_schedule(cohort, id=ID, time="visit_date", spacing="30D", report=report)
    with pytest.raises(OptionError, match="spacing"):
        plot.visit_schedule(cohort, id=ID, time="visit_date", tolerance="3D")


def test_schedule_with_time_zone_aware_dates(cohort):
    aware = cohort.assign(visit_date=cohort["visit_date"].dt.tz_localize("Europe/Paris"))
    ax = plot.visit_schedule(aware, id=ID, time="visit_date", spacing="30D", subjects=None)
    naive = plot.visit_schedule(cohort, id=ID, time="visit_date", spacing="30D", subjects=None)
    a = {ln.get_gid(): len(ln.get_xdata()) for ln in ax.get_lines() if ln.get_gid().startswith("problem:")}
    b = {ln.get_gid(): len(ln.get_xdata()) for ln in naive.get_lines() if ln.get_gid().startswith("problem:")}
    assert a == b and a


# --------------------------------------------------------------------- optional dependency
def test_clear_error_without_matplotlib(monkeypatch):
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # makes "import matplotlib" fail
    with pytest.raises(ImportError, match=r"pip install 'panelfx\[plot\]'"):
        plot.trajectories(small(), "y", id="pid", time="day")


def test_importing_panelfx_does_not_import_matplotlib():
    code = "import sys, panelfx, panelfx.plot, panelfx.demo; print('matplotlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
