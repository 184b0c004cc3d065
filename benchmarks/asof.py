"""Benchmark: the latest laboratory result at or before each visit, panelfx against general engines.

Invented data: ``--visits`` visit rows (default 2,000,000) of subjects with irregular integer
days, and ``--labs`` laboratory rows (default 5,000,000) of the same subjects (and a few
others) on other days; both tables shuffled.  The job: for each visit, the value of the
subject's latest result at or before the visit day, in the visits' own row order.

- ``panelfx``: ``derive(visits, as_of("labs", "alt", time="drawn"), tables={"labs": labs})``;
- ``pandas``: ``merge_asof(by="pid")`` after the global sort it requires, then back to row order;
- ``polars``: ``join_asof(by="pid")`` after sorting by time, then back to row order;
- ``duckdb``: ``ASOF LEFT JOIN ... ON v.pid = l.pid AND v.day >= l.drawn``, ordered by visit row.

The lab table has no ties (one result per subject and day), so every engine must give the
same answer: it is checked before the timings are printed.  Each engine runs ``--repeat``
times in this one process (best time kept); ratios are to panelfx in the same run.

Usage (after ``pip install -e '.[bench]'``)::

    python benchmarks/asof.py                        # 2M visits, 5M lab rows
    python benchmarks/asof.py --visits 20000 --labs 50000 --repeat 1

Not a test: nothing asserts a speed.  ``tests/test_benchmark_asof.py`` runs the agreement
check on tiny tables so that the comparison code cannot rot.
"""

from __future__ import annotations

import argparse
import gc
import time
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd

ENGINES = ("panelfx", "pandas", "polars", "duckdb")


def make_tables(visits: int, labs: int, seed: int = 7) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Invented visits (about 10 per subject) and laboratory results (about 25 per subject, on
    distinct days per subject), both shuffled."""
    rng = np.random.default_rng(seed)
    subjects = max(1, visits // 10)
    vid = rng.integers(0, subjects, visits)
    vday = rng.integers(0, 2000, visits)
    v = pd.DataFrame({"pid": vid, "day": vday}).drop_duplicates(["pid", "day"])
    lid = rng.integers(0, subjects + subjects // 50 + 1, labs)  # some subjects never visit
    lday = rng.integers(-100, 2000, labs)
    lab = pd.DataFrame({"pid": lid, "drawn": lday}).drop_duplicates(["pid", "drawn"])
    lab["alt"] = rng.normal(30, 8, len(lab)).round(1)
    v = v.sample(frac=1, random_state=seed).reset_index(drop=True)
    lab = lab.sample(frac=1, random_state=seed + 1).reset_index(drop=True)
    return v, lab


def run_panelfx(v: pd.DataFrame, lab: pd.DataFrame) -> np.ndarray:
    import panelfx as pfx

    out = pfx.derive(v, pfx.as_of("labs", "alt", time="drawn"), id="pid", time="day", tables={"labs": lab})
    return out["alt_asof"].to_numpy()


def run_pandas(v: pd.DataFrame, lab: pd.DataFrame) -> np.ndarray:
    left = v.assign(row=np.arange(len(v))).sort_values("day", kind="stable")
    right = lab.sort_values("drawn", kind="stable")
    m = pd.merge_asof(left, right, left_on="day", right_on="drawn", by="pid", direction="backward")
    out = np.empty(len(v))
    out[m["row"].to_numpy()] = m["alt"].to_numpy()
    return out


def run_polars(v: pd.DataFrame, lab: pd.DataFrame) -> np.ndarray:
    import warnings

    import polars as pl

    left = pl.from_pandas(v).with_row_index("row").sort("day")
    right = pl.from_pandas(lab).sort("drawn")
    with warnings.catch_warnings():  # "sortedness cannot be checked with by groups": sorted above
        warnings.simplefilter("ignore", UserWarning)
        m = left.join_asof(right, left_on="day", right_on="drawn", by="pid", strategy="backward").sort("row")
    return m["alt"].to_numpy()


def run_duckdb(v: pd.DataFrame, lab: pd.DataFrame) -> np.ndarray:
    import duckdb

    con = duckdb.connect()
    con.register("v", v.assign(row=np.arange(len(v))))
    con.register("l", lab)
    m = con.execute("SELECT v.row, l.alt FROM v ASOF LEFT JOIN l ON v.pid = l.pid AND v.day >= l.drawn "
                    "ORDER BY v.row").df()
    return m["alt"].to_numpy(dtype=float)


RUNNERS: dict[str, Callable[[pd.DataFrame, pd.DataFrame], np.ndarray]] = {
    "panelfx": run_panelfx, "pandas": run_pandas, "polars": run_polars, "duckdb": run_duckdb}


def agree(v: pd.DataFrame, lab: pd.DataFrame, engines: tuple[str, ...] = ENGINES) -> dict[str, np.ndarray]:
    """Every engine's answer; raises AssertionError when one differs from panelfx."""
    results = {name: RUNNERS[name](v, lab) for name in engines}
    base = results["panelfx"]
    for name, got in results.items():
        np.testing.assert_array_equal(got, base, err_msg=f"{name} differs from panelfx")
    return results


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--visits", type=int, default=2_000_000)
    parser.add_argument("--labs", type=int, default=5_000_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--engines", default=",".join(ENGINES))
    args = parser.parse_args(argv)
    engines = tuple(e for e in args.engines.split(",") if e)
    v, lab = make_tables(args.visits, args.labs)
    print(f"visits: {len(v):,} rows; labs: {len(lab):,} rows (invented)")
    agree(v, lab, engines)
    print("all engines agree")
    best: dict[str, float] = {}
    for name in engines:
        times: list[Any] = []
        for _ in range(args.repeat):
            gc.collect()
            t0 = time.perf_counter()
            RUNNERS[name](v, lab)
            times.append(time.perf_counter() - t0)
        best[name] = min(times)
    print(f"{'engine':<10}{'seconds':>10}{'x panelfx':>12}")
    for name in engines:
        print(f"{name:<10}{best[name]:>10.2f}{best[name] / best['panelfx']:>12.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
