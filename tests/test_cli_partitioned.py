"""``panelfx apply`` on data bigger than memory: hash partitions on disk, a folder of parts.

A small Parquet file (the invented demo cohort) with a tiny memory budget stands for a file
bigger than memory: the budget forces several partitions.  The values must equal the
in-memory path's, every subject must sit in one part, and the output folder must appear
only when complete, also when the run is killed.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.dataset as ds
import pyarrow.parquet as pq
import pytest

import panelfx as pfx
from panelfx.__main__ import main
from panelfx._bigfile import MARKER, parse_size, plan_partitions
from panelfx.demo import cohort

KEYS = {"id": ["site", "subject"], "time": "visit_date"}
STEPS = [pfx.baseline("sbp"), pfx.change_from_baseline("sbp"), pfx.lag("sbp"), pfx.lag("dizzy"),
         pfx.rolling("sbp", span="90D"), pfx.cumulative("dose_mg", "step"), pfx.occasion(), pfx.lag("visits")]
DERIVED = [n for t in STEPS for n in t.outputs()]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("big")
    df = cohort(1500, seed=7)
    # an integer column with a missing value in a few rows only: float64 when read whole
    visits = pd.array(np.arange(len(df)) % 7, dtype="Int64")
    visits[5] = pd.NA
    df = df.assign(visits=visits)
    # written without pandas' metadata, as other tools write Parquet: the int column with a
    # missing value then reads as float64 (pandas' rule) when the whole file is read at once
    table = pa.Table.from_pandas(df, preserve_index=False).replace_schema_metadata(None)
    pq.write_table(table, folder / "visits.parquet", row_group_size=4000)
    pfx.Derivation(*STEPS, **KEYS).save(str(folder / "d.json"))
    return folder


def read_parts(path) -> pd.DataFrame:
    return ds.dataset(str(path), format="parquet").to_table().to_pandas(date_as_object=False)


def in_memory(files) -> pd.DataFrame:
    assert main(["apply", str(files / "d.json"), str(files / "visits.parquet"), "-o", str(files / "mem.parquet"),
                 "-q"]) == 0
    return pd.read_parquet(files / "mem.parquet")


def test_same_values_as_the_in_memory_path(files, capsys):
    out = files / "parts"
    assert main(["apply", str(files / "d.json"), str(files / "visits.parquet"), "-o", str(out),
                 "--memory", "1MB", "--row-number", "row"]) == 0
    err = capsys.readouterr().err
    assert "partition 1 of" in err and "rows in" in err
    parts = sorted(p for p in os.listdir(out) if p.endswith(".parquet"))
    assert len(parts) > 3 and os.path.exists(out / MARKER)
    got = read_parts(out).sort_values("row").reset_index(drop=True)
    want = in_memory(files)
    assert len(got) == len(want) and (got["row"].to_numpy() == np.arange(len(want))).all()
    for c in want.columns:
        pd.testing.assert_series_equal(got[c], want[c], check_exact=True, obj=c)
    # Outside reference: pandas' groupby sees every subject in exactly one part.
    per_part = pd.concat([pd.read_parquet(out / p)[["site", "subject"]].assign(part=i) for i, p in enumerate(parts)])
    assert (per_part.groupby(["site", "subject"])["part"].nunique() == 1).all()
    # every part has the same schema (an int column with a missing value is float64 everywhere)
    schemas = {str(pq.read_schema(out / p).remove_metadata()) for p in parts}
    assert len(schemas) == 1 and got["visits"].dtype == np.float64 and got["visits_lag1"].dtype == np.float64
    meta = json.loads(pq.read_schema(out / parts[0]).metadata[b"panelfx"])
    assert meta["derivation"]["transforms"][0]["type"] == "baseline" and meta["dictionary"][0]["column"]


def test_a_folder_of_parquet_files_as_input_and_two_workers(files, capsys):
    src = files / "dataset"
    df = pd.read_parquet(files / "visits.parquet")
    os.makedirs(src, exist_ok=True)
    for i, chunk in enumerate(np.array_split(np.arange(len(df)), 3)):
        df.iloc[chunk].to_parquet(src / f"chunk-{i}.parquet")
    out = files / "from-folder"
    assert main(["apply", str(files / "d.json"), str(src), "-o", str(out), "--partitions", "3", "--workers", "2",
                 "--row-number", "row"]) == 0
    assert "partition 3 of 3 done" in capsys.readouterr().err
    got = read_parts(out).sort_values("row").reset_index(drop=True)
    want = in_memory(files)
    for c in DERIVED:
        pd.testing.assert_series_equal(got[c], want[c], check_exact=True, obj=c)


def test_a_previous_output_folder_is_replaced_and_other_folders_are_not(files, capsys):
    out = files / "again"
    args = ["apply", str(files / "d.json"), str(files / "visits.parquet"), "-o", str(out), "--partitions", "2", "-q"]
    assert main(args) == 0
    (out / "stale.parquet").write_bytes(b"")
    assert main(args) == 0
    assert not os.path.exists(out / "stale.parquet")  # the previous output went as a whole
    other = files / "mine"
    other.mkdir()
    (other / "notes.txt").write_text("keep me")
    assert main([*args[:4], str(other), "--partitions", "2", "-q"]) == 2
    assert "not written by panelfx" in capsys.readouterr().err
    assert (other / "notes.txt").read_text() == "keep me"
    assert not [p for p in os.listdir(files) if p.endswith(".panelfx-tmp")]


def test_refusals(files, capsys):
    pd.read_parquet(files / "visits.parquet").head(50).to_csv(files / "v.csv", index=False)
    assert main(["apply", str(files / "d.json"), str(files / "v.csv"), "-o", str(files / "x"), "--memory", "1GB"]) == 2
    assert "Parquet" in capsys.readouterr().err
    assert main(["apply", str(files / "d.json"), str(files / "visits.parquet"), "-o", str(files / "x"),
                 "--memory", "lots"]) == 2
    assert "memory" in capsys.readouterr().err
    pfx.Derivation(pfx.lag("nope"), **KEYS).save(str(files / "bad.json"))
    assert main(["apply", str(files / "bad.json"), str(files / "visits.parquet"), "-o", str(files / "x"),
                 "--partitions", "2"]) == 2
    assert "'nope'" in capsys.readouterr().err
    pfx.Derivation(pfx.as_of("labs", "alt", time="drawn"), **KEYS).save(str(files / "side.json"))
    assert main(["apply", str(files / "side.json"), str(files / "visits.parquet"), "-o", str(files / "x"),
                 "--partitions", "2"]) == 2
    assert "side tables" in capsys.readouterr().err
    assert not os.path.exists(files / "x")


def test_sizes_and_partition_counts():
    assert parse_size("2GB") == 2 * 2**30 and parse_size("512m") == 512 * 2**20 and parse_size("1.5G") == 3 * 2**29
    assert plan_partitions(20_000_000, 20_000_000 * 40, 9, 24 * 2**30) == 1
    assert plan_partitions(200_000_000, 200_000_000 * 40, 9, 4 * 2**30) > 10


def test_output_folder_is_atomic_when_the_run_is_killed(files):
    df = pd.concat([pd.read_parquet(files / "visits.parquet")] * 1, ignore_index=True)
    target = files / "killed"
    target.mkdir()
    (target / MARKER).write_text("{}")  # a previous output, which must survive the killed run
    (target / "part-00000.parquet").write_bytes(b"previous")
    env = {**os.environ, "PYTHONDONTWRITEBYTECODE": "1"}
    proc = subprocess.Popen([sys.executable, "-m", "panelfx", "apply", str(files / "d.json"),
                             str(files / "visits.parquet"), "-o", str(target), "--partitions", "60", "-q"],
                            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 60
    killed = False
    while time.monotonic() < deadline and proc.poll() is None:
        tmp = [p for p in os.listdir(files) if p.startswith(".killed.") and p.endswith(".panelfx-tmp")]
        if tmp and any(p.startswith("part-") for p in os.listdir(files / tmp[0])):
            os.kill(proc.pid, signal.SIGKILL)  # half way through the per-partition pass
            killed = True
            break
        time.sleep(0.002)
    proc.wait()
    assert killed, f"the run ended before it could be killed ({len(df)} rows)"
    assert sorted(os.listdir(target)) == [MARKER, "part-00000.parquet"]
    assert (target / "part-00000.parquet").read_bytes() == b"previous"
