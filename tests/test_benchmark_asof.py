"""The as-of benchmark's engines agree on tiny invented tables (the comparison code cannot rot)."""

from __future__ import annotations

import importlib.util
import pathlib

import pytest

SPEC = importlib.util.spec_from_file_location("bench_asof", pathlib.Path(__file__).parents[1] / "benchmarks" / "asof.py")
bench = importlib.util.module_from_spec(SPEC)
SPEC.loader.exec_module(bench)


def test_engines_agree_on_a_tiny_run():
    engines = ["panelfx", "pandas", "duckdb"]
    if importlib.util.find_spec("polars") is not None:
        engines.append("polars")
    v, lab = bench.make_tables(2000, 5000)
    results = bench.agree(v, lab, tuple(engines))
    assert 0 < (results["panelfx"] == results["panelfx"]).sum() < len(v)  # some found, some missing


def test_a_wrong_engine_is_caught():
    v, lab = bench.make_tables(200, 500)
    bench.RUNNERS["broken"] = lambda v, lab: bench.run_panelfx(v, lab) + 1
    try:
        with pytest.raises(AssertionError, match="broken differs"):
            bench.agree(v, lab, ("panelfx", "broken"))
    finally:
        del bench.RUNNERS["broken"]
