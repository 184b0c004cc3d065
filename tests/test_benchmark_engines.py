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

import panelfx as pfx
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
    out = pfx.derive(pd.DataFrame(data), pfx.cumulative("dose"), pfx.cumulative("dose", "trapezoid"),
                    id="id", time="t")
    exact = bench.per_subject_sums(data)
    assert bench.relative_error(out["dose_cum"].to_numpy(), exact["cumulative_sum"]) <= 1e-12
    assert bench.relative_error(out["dose_auc"].to_numpy(), exact["cumulative_area"]) <= 1e-12
    assert bench.relative_error(np.array([0.0, 1.0]), np.array([0.0, 1.0 + 1e-9])) > 1e-12
    assert bench.relative_error(np.array([1e-300, 1.0]), np.array([0.0, 1.0])) == float("inf")


def test_reuse_freed_memory_reaches_the_workers(bench, monkeypatch):
    """--reuse-freed-memory hands glibc's allocator settings to every worker process (and only then)."""
    import argparse
    import json

    seen = []

    class Done:
        returncode = 0
        stdout = json.dumps({"ok": True})
        stderr = ""

    def fake_run(cmd, **kw):
        seen.append(kw.get("env"))
        return Done()

    monkeypatch.setattr(bench.subprocess, "run", fake_run)
    for flag in (True, False):
        args = argparse.Namespace(repeat=1, min_repeat=1, budget=1.0, reuse_freed_memory=flag)
        assert bench._spawn(args, worker=True, engine="numpy") == {"ok": True}
    assert seen[0]["MALLOC_MMAP_MAX_"] == "0" and int(seen[0]["MALLOC_TRIM_THRESHOLD_"]) >= 2**30
    assert seen[1] is None  # the caller's environment, unchanged
