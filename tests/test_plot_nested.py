"""panelfx.plot: mean profiles with a band, the within/between picture, trajectory groups.

The numbers drawn are checked against outside references: numpy (polyfit for the pooled
slope, nanmean / nanstd for the profile and its band), pandas (groupby means for the group
curves and the subject-mean deviations behind the within slope).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

import panelfx as pfx  # noqa: E402
from panelfx import demo, plot  # noqa: E402
from panelfx.errors import NotConstantError, OptionError  # noqa: E402

ID = ["region", "clinic", "patient"]


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


@pytest.fixture(scope="module")
def rehab() -> pd.DataFrame:
    return demo.rehab(3, seed=5)


def by_gid(ax, gid):
    return [a for a in [*ax.get_lines(), *ax.collections] if a.get_gid() == gid]


def test_profile_mean_and_band_by_group(rehab, tmp_path):
    at = [0, 4, 8, 12, 16, 20]
    fig = plot.profiles(rehab, "walk_m", id=ID, time="week", by="pattern", at=at)
    long = pfx.grid(rehab, "walk_m", id=ID, time="week", at=at)
    pattern = rehab.drop_duplicates(ID).set_index(ID)["pattern"]
    long["pattern"] = pattern.reindex(pd.MultiIndex.from_frame(long[ID])).to_numpy()
    assert [ax.get_title() for ax in fig.axes] == [
        f"pattern = {p} ({(pattern == p).sum()} subjects)" for p in ("early", "flat", "steady")]
    for ax, p in zip(fig.axes, ("early", "flat", "steady")):
        v = long[long["pattern"] == p].pivot_table(index=ID, columns="week", values="walk_m", dropna=False)
        v = v.to_numpy()
        (mean,) = by_gid(ax, "mean")
        np.testing.assert_allclose(mean.get_ydata(), np.nanmean(v, axis=0), rtol=1e-12)
        np.testing.assert_allclose(mean.get_xdata(), at)
        (band,) = by_gid(ax, "band")
        upper = band.get_paths()[0].vertices[:, 1].max()
        half = 1.96 * np.nanstd(v, axis=0, ddof=1) / np.sqrt((~np.isnan(v)).sum(axis=0))
        assert upper == pytest.approx(np.max(np.nanmean(v, axis=0) + half), rel=1e-12)
        (faint,) = by_gid(ax, "subjects")
        assert len(faint.get_segments()) == (pattern == p).sum()  # every subject drawn, one collection
        assert faint.get_alpha() < 0.5
    fig.savefig(tmp_path / "p.png")
    assert (tmp_path / "p.png").stat().st_size > 1000


def test_profile_sd_band_without_groups_and_errors(rehab):
    fig = plot.profiles(rehab, "rest_hr", id=ID, time="week", band="sd")
    assert len(fig.axes) == 1
    (mean,) = by_gid(fig.axes[0], "mean")
    assert len(mean.get_xdata()) == 41  # 40 even steps over the observed weeks
    with pytest.raises(OptionError, match="band must be one of"):
        plot.profiles(rehab, "rest_hr", id=ID, time="week", band="iqr")
    moving = rehab.assign(g=np.arange(len(rehab)) % 2)
    with pytest.raises(NotConstantError, match="by column 'g' varies within subject"):
        plot.profiles(moving, "rest_hr", id=ID, time="week", by="g")


def test_within_between_slopes(rehab):
    ax = plot.within_between(rehab, "exercise_min", "rest_hr", id=ID, time="week")
    both = rehab.dropna(subset=["exercise_min", "rest_hr"])
    pooled = np.polyfit(both["exercise_min"], both["rest_hr"], 1)[0]  # numpy least squares
    g = both.groupby(ID)
    dx = both["exercise_min"] - g["exercise_min"].transform("mean")
    dy = both["rest_hr"] - g["rest_hr"].transform("mean")
    within = np.polyfit(dx, dy, 1)[0]  # slope on deviations from the subject means (pandas)
    for gid, want, words in (("pooled", pooled, "pooled (cross-sectional) slope"),
                             ("within", within, "average within-subject slope")):
        (line,) = by_gid(ax, gid)
        x, y = line.get_xdata(), line.get_ydata()
        assert (y[1] - y[0]) / (x[1] - x[0]) == pytest.approx(want, rel=1e-9)
        assert line.get_label() == f"{words} {want:.3g}"
        # drawn through the mean point
        assert np.interp(both["exercise_min"].mean(), x, y) == pytest.approx(both["rest_hr"].mean())
    # truth of the invented data: within -0.05, patients who exercise more differ more (-0.12)
    assert within == pytest.approx(-0.05, abs=0.015) and pooled < within
    (lines,) = by_gid(ax, "subjects")
    assert len(lines.get_segments()) == both.groupby(ID).ngroups
    for seg in lines.get_segments():
        assert (np.diff(seg[:, 0]) >= 0).all()  # each subject's points joined left to right
    sampled = plot.within_between(rehab, "exercise_min", "rest_hr", id=ID, time="week", subjects=5)
    assert len(by_gid(sampled, "subjects")[0].get_segments()) == 5
    (line,) = by_gid(sampled, "within")
    assert line.get_label() == f"average within-subject slope {within:.3g}"  # slopes from every subject


def test_trajectory_groups_mean_curves(rehab):
    wide = pfx.grid(rehab, "walk_m", id=ID, time="week", at=[0, 6, 12], shape="wide")
    labels = rehab.drop_duplicates(ID).set_index(ID)["pattern"].reindex(wide.index)
    ax = plot.trajectory_groups(wide, labels)
    want = wide.groupby(labels.to_numpy()).mean()  # pandas: NaN left out
    for p in ("early", "flat", "steady"):
        (mean,) = by_gid(ax, f"mean:{p}")
        np.testing.assert_allclose(mean.get_ydata(), want.loc[p].to_numpy(), rtol=1e-12)
        assert mean.get_label() == f"{p} (n = {(labels == p).sum()})"
        (faint,) = by_gid(ax, f"subjects:{p}")
        assert len(faint.get_segments()) == (labels == p).sum()
        assert matplotlib.colors.to_hex(faint.get_colors()[0]) == matplotlib.colors.to_hex(mean.get_color())
    # a list in row order gives the same picture; wrong lengths and unaligned labels are refused
    again = plot.trajectory_groups(wide, labels.tolist())
    assert [ln.get_label() for ln in again.get_lines()] == [ln.get_label() for ln in ax.get_lines()]
    with pytest.raises(OptionError, match="entries for"):
        plot.trajectory_groups(wide, ["a"])
    with pytest.raises(OptionError, match="indexed like"):
        plot.trajectory_groups(wide, pd.Series(labels.to_numpy()))
    with pytest.raises(OptionError, match="one value column at a time"):
        plot.trajectory_groups(pfx.grid(rehab, ["walk_m", "rest_hr"], id=ID, time="week", at=[0, 6],
                                        shape="wide"), labels)
