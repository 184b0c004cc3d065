"""The benchmark's engines (benchmarks/run.py) compute the same job: checked on a tiny panel.

No timing here: this only keeps the comparison code honest, so that a benchmark run
compares engines that agree.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import panelfx as px
from panelfx.testing import reference

_PATH = Path(__file__).resolve().parent.parent / "benchmarks" / "run.py"


@pytest.fixture(scope="module")
def bench():
    spec = importlib.util.spec_from_file_location("panelfx_benchmark_run", _PATH)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_panelfx_has_every_transform_of_the_job(bench):
    assert bench.PanelfxEngine().available() == list(bench.JOB)


@pytest.mark.parametrize("shuffled", [True, False])
def test_installed_engines_agree_with_the_floor(bench, shuffled):
    """pandas, panelfx, DuckDB (test extra) and polars (bench extra, when installed)."""
    data = bench.make_panel(150, seed=11, shuffled=shuffled)
    keys = list(bench.JOB)
    floor = bench.NumpyEngine()
    ref = floor.extract(floor.run(floor.prepare(data), keys), keys)
    checked = []
    for name in ("panelfx", "pandas", "duckdb", "polars"):
        if not bench._installed(name):
            continue
        eng = bench.ENGINE_CLASSES[name]()
        got = eng.extract(eng.run(eng.prepare(data), keys), keys)
        assert bench.disagreements(got, ref) == [], name
        checked.append(name)
    assert {"panelfx", "pandas", "duckdb"} <= set(checked)


def test_floor_matches_the_simple_reference(bench):
    """The floor is checked against panelfx.testing.reference (plain loops per subject),
    so that agreeing with the floor means being right."""
    data = bench.make_panel(60, seed=3)
    keys = list(bench.JOB)
    floor = bench.NumpyEngine()
    got = floor.extract(floor.run(floor.prepare(data), keys), keys)
    makers = bench.PanelfxEngine()._transforms()
    transforms = [makers[k]() for k in keys]
    ref = reference(pd.DataFrame(data), *transforms, id="id", time="t")
    expected = {k: ref[tr.outputs()[0]].to_numpy(dtype="float64", na_value=np.nan) for k, tr in zip(keys, transforms)}
    assert bench.disagreements(got, expected) == []


def test_disagreements_reports_values_and_missing_rows(bench):
    ref = {"lag": np.array([np.nan, 1.0, 2.0])}
    assert bench.disagreements({"lag": np.array([np.nan, 1.0, 2.0])}, ref) == []
    assert "relative difference" in bench.disagreements({"lag": np.array([np.nan, 1.0, 2.1])}, ref)[0]
    assert "missing in 1 other rows" in bench.disagreements({"lag": np.array([0.0, 1.0, 2.0])}, ref)[0]


def test_running_sums_are_accurate_to_per_subject_sums(bench):
    data = bench.make_panel(400, seed=5)
    out = px.derive(pd.DataFrame(data), px.cumulative("dose"), px.cumulative("dose", "trapezoid"),
                    id="id", time="t")
    exact = bench.per_subject_sums(data)
    assert bench.relative_error(out["dose_cum"].to_numpy(), exact["cumulative_sum"]) <= 1e-12
    assert bench.relative_error(out["dose_auc"].to_numpy(), exact["cumulative_area"]) <= 1e-12
    assert bench.relative_error(np.array([0.0, 1.0]), np.array([0.0, 1.0 + 1e-9])) > 1e-12
    assert bench.relative_error(np.array([1e-300, 1.0]), np.array([0.0, 1.0])) == float("inf")


@pytest.mark.parametrize("seed", range(4))
def test_fast_panel_ordering_matches_its_definition(seed):
    """The engine's speed paths (packed sort key, integer ids sorted by value, the O(n)
    sorted check) give exactly the order defined by first-appearance subject codes and
    a stable sort on (code, time): ``np.lexsort``, or no order at all when the rows are
    already grouped by subject in time order."""
    from panelfx._panel import Panel, time_to_native

    rng = np.random.default_rng(seed)
    for trial in range(150):
        n = int(rng.integers(2, 200))
        ids = rng.integers(-5, int(rng.integers(1, 30)), n) * int(rng.choice([1, 7, 10**12]))
        kind = trial % 4
        t = [rng.integers(0, 30, n), np.round(rng.normal(size=n), 2 if trial % 2 else 9),
             pd.to_datetime(rng.integers(0, 50, n) * 86_400 * 10**9), rng.integers(0, 1000, n) * 1.0][kind]
        df = pd.DataFrame({"id": ids if trial % 7 else ids.astype(str), "t": t})
        if trial % 3 == 0:
            df = df.sort_values(["id", "t"])
        if trial % 5 == 0:  # grouped by subject, in time order, subjects not in id order
            blocks = [g for _, g in df.sort_values(["id", "t"]).groupby("id")]
            df = pd.concat([blocks[i] for i in rng.permutation(len(blocks))])
        p = Panel(df, id="id", time="t", strict=False)
        codes = pd.factorize(df["id"], sort=False)[0]
        tt = time_to_native(df["t"], p.time_kind)
        same = codes[1:] == codes[:-1]
        in_order = (codes[1:] >= codes[:-1]).all() and (tt[1:][same] >= tt[:-1][same]).all()
        if in_order:
            assert p.order is None
        else:
            assert np.array_equal(p.order, np.lexsort((tt, codes)))
        sc = codes if in_order else codes[p.order]
        assert np.array_equal(p.starts, np.flatnonzero(np.r_[True, sc[1:] != sc[:-1]]))
