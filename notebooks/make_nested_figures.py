"""Redraw the README figures of the nested demo data: ``python notebooks/make_nested_figures.py``.

Writes notebooks/figures/nested_profiles.png (walking distance by region: mean profile and
band over faint subjects) and notebooks/figures/nested_within_groups.png (the within/between
picture of heart rate on exercise, and walking-distance trajectory groups from k-means),
from the invented panelfx.demo.rehab() data, as the notebook nested.ipynb draws them.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

import panelfx as pfx  # noqa: E402
from panelfx import demo, plot  # noqa: E402

ID = ["region", "clinic", "patient"]
FIGURES = Path(__file__).resolve().parent / "figures"


def main() -> list[Path]:
    from sklearn.cluster import KMeans

    df = demo.rehab(seed=2027)
    FIGURES.mkdir(exist_ok=True)
    fig = plot.profiles(df, "walk_m", id=ID, time="week", by="region", every=1, ncols=5)
    fig.set_size_inches(15, 3.4)
    fig.suptitle("Invented rehabilitation data (panelfx.demo.rehab): six-minute walk by region", fontsize=10)
    fig.tight_layout()
    first = FIGURES / "nested_profiles.png"
    fig.savefig(first, dpi=70)
    plt.close(fig)

    changes = pfx.derive(df, pfx.change_from_baseline("walk_m"), id=ID, time="week")
    wide = pfx.grid(changes, "walk_m_change", id=ID, time="week", at=list(range(0, 23, 2)), shape="wide").dropna()
    groups = KMeans(n_clusters=3, n_init=10, random_state=0).fit_predict(wide.to_numpy())
    fig, (left, right) = plt.subplots(1, 2, figsize=(13, 4.4))
    plot.within_between(df, "exercise_min", "rest_hr", id=ID, time="week", subjects=40, seed=1, ax=left)
    plot.trajectory_groups(wide, [f"group {g + 1}" for g in groups], ax=right)
    right.set_ylabel("walk_m change from week 0")
    fig.suptitle("Invented rehabilitation data (panelfx.demo.rehab, seed 2027)", fontsize=10)
    fig.tight_layout()
    second = FIGURES / "nested_within_groups.png"
    fig.savefig(second, dpi=60)
    plt.close(fig)
    return [first, second]


if __name__ == "__main__":
    for path in main():
        print(path)
