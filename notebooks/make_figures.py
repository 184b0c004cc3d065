"""Redraw the README figure from the invented demo cohort: ``python notebooks/make_figures.py``.

Writes notebooks/figures/demo_cohort.png (the same two panels as the walkthrough notebook).
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

import panelfx as pfx  # noqa: E402
from panelfx import demo, plot  # noqa: E402

ID = ["site", "subject"]
OUT = Path(__file__).resolve().parent / "figures" / "demo_cohort.png"


def main() -> Path:
    df = demo.cohort(300, seed=2026)
    out = pfx.derive(df, pfx.rolling("sbp", "mean", span="90D"), id=ID, time="visit_date")
    report = pfx.check(df, id=ID, time="visit_date", spacing="30D")
    fig, (left, right) = plt.subplots(1, 2, figsize=(12, 4.2))
    plot.trajectories(out, "sbp", id=ID, time="day", subjects=6, overlay="sbp_mean_90d", seed=1, ax=left)
    plot.visit_schedule(df, id=ID, time="visit_date", report=report, subjects=25, seed=1, ax=right)
    fig.suptitle("Invented demo cohort (panelfx.demo.cohort, seed 2026)", fontsize=10)
    fig.tight_layout()
    OUT.parent.mkdir(exist_ok=True)
    fig.savefig(OUT, dpi=80)
    plt.close(fig)
    return OUT


if __name__ == "__main__":
    print(main())
