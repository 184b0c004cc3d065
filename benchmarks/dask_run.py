"""Benchmark: panelfx on one process against panelfx.dask on a Dask LocalCluster, and the
command line on a file bigger than memory.

The data: the synthetic panel of ``benchmarks/run.py`` (invented: about 10 occasions per
subject at irregular integer days, rows shuffled), written as Parquet; the job: its nine
history transforms in one derivation.  Every run reads the Parquet input and writes its
result as Parquet, in a fresh process:

- ``single``: ``pd.read_parquet`` -> ``pfx.derive`` -> ``to_parquet`` in one process;
- ``dask-1`` / ``dask-2``: ``dd.read_parquet`` -> ``panelfx.dask.derive`` (hash shuffle by
  subject) -> ``to_parquet`` on a ``distributed.LocalCluster`` of 1 or 2 worker processes
  (one thread each).  The shuffle's share is the time of Dask's shuffle tasks over the time
  of all tasks, from the cluster's task stream;
- ``bigger``: ``python -m panelfx apply --memory M --workers 2`` on a file of ``--big``
  rows, generated chunk by chunk (subjects shuffled within each chunk of 1M subjects).

Peak memory: of the single process, of each Dask worker process, and of the command
line's main process and largest worker: whole-process peaks (Linux ``VmHWM``).  Results as ratios of the same run.  Not a test.

Usage (after ``pip install -e '.[dask,bench]'``)::

    python benchmarks/dask_run.py --rows 2000000
    python benchmarks/dask_run.py --rows 2000000,20000000 --big 200000000 --big-memory 4GB
"""

from __future__ import annotations

import argparse
import json
import os
import re
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from typing import Any

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from run import OCCASIONS, SPAN, make_panel  # noqa: E402  (the shared synthetic panel)

SHUFFLE_WORDS = ("shuffle", "p2p", "rearrange", "split-", "group-", "assign-partitioning", "repartition")


def derivation() -> Any:
    import panelfx as pfx

    return pfx.Derivation(
        pfx.baseline("y"), pfx.change_from_baseline("y"), pfx.change_from_previous("y"), pfx.lag("y"),
        pfx.cumulative("dose", "sum"), pfx.cumulative("dose", "trapezoid"), pfx.time_since("event"),
        pfx.rolling("y", span=SPAN), pfx.rolling("y", occasions=OCCASIONS), id="id", time="t",
        description="benchmark job (invented data)")


def write_panel(path: str, rows: int, seed: int = 2024, files: int = 1, chunk_subjects: int = 1_000_000) -> int:
    """The synthetic panel as Parquet (``files`` > 1: a folder), chunk by chunk; returns rows."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    subjects = max(1, rows // 10)
    done = 0
    writers: list[Any] = []
    if files > 1:
        os.makedirs(path, exist_ok=True)
    try:
        offset = 0
        for chunk, start in enumerate(range(0, subjects, chunk_subjects)):
            n = min(chunk_subjects, subjects - start)
            data = make_panel(n, seed + chunk)
            data["id"] = data["id"] + offset  # ids stay distinct across chunks
            offset = int(data["id"].max()) + 1
            table = pa.table(data)
            if not writers:
                targets = [path] if files == 1 else [os.path.join(path, f"part.{i:03d}.parquet") for i in range(files)]
                writers = [pq.ParquetWriter(t, table.schema) for t in targets]
            step = -(-table.num_rows // len(writers))
            for i, w in enumerate(writers):
                w.write_table(table.slice(i * step, step), row_group_size=1_000_000)
            done += table.num_rows
    finally:
        for w in writers:
            w.close()
    return done


def peak_bytes() -> int:
    """This process's peak resident size (Linux VmHWM: unlike getrusage's, not inherited by a
    process from the one that spawned it)."""
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def run_single(src: str, out: str) -> dict[str, Any]:
    import pandas as pd

    t0 = time.perf_counter()
    frame = pd.read_parquet(src)
    result = derivation().apply(frame)
    result.to_parquet(out)
    return {"seconds": time.perf_counter() - t0, "peak_per_process": [peak_bytes()], "rows": len(result)}


def run_dask(src: str, out: str, workers: int) -> dict[str, Any]:
    import dask.dataframe as dd
    import distributed

    import panelfx.dask as pfd

    with distributed.LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, memory_limit=0,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        client.run(lambda: __import__("panelfx.dask"))  # imports are not part of the job
        t0 = time.perf_counter()
        with distributed.get_task_stream(client) as stream:
            ddf = dd.read_parquet(src)
            result = pfd.apply(derivation(), ddf)
            result.to_parquet(out, write_index=False)
        seconds = time.perf_counter() - t0
        peaks = list(client.run(peak_bytes).values())
        busy: dict[str, float] = {}
        for task in stream.data:
            key = str(task["key"]).lower()
            span = sum(s["stop"] - s["start"] for s in task["startstops"] if s["action"] == "compute")
            kind = "shuffle" if any(w in key for w in SHUFFLE_WORDS) else "other"
            busy[kind] = busy.get(kind, 0.0) + span
        total = sum(busy.values()) or 1.0
        rows = int(dd.read_parquet(out).shape[0].compute())
    return {"seconds": seconds, "peak_per_process": peaks, "shuffle_share": busy.get("shuffle", 0.0) / total,
            "task_seconds": busy, "rows": rows, "partitions": ddf.npartitions}


def run_big(src: str, out: str, memory: str, workers: int, derivation_file: str) -> dict[str, Any]:
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "panelfx", "apply", derivation_file, src, "-o", out,
                           "--memory", memory, "--workers", str(workers)], capture_output=True, text=True)
    seconds = time.perf_counter() - t0
    if proc.returncode != 0:
        raise RuntimeError(proc.stderr)
    # the command line's last line: "... peak memory X GiB in this process, Y GiB in the largest worker"
    last = proc.stderr.strip().splitlines()[-1]
    peaks = [float(x) * 2**30 for x in re.findall(r"([0-9.]+) GiB", last)]
    import pyarrow.dataset as ds

    rows = ds.dataset(out, format="parquet").count_rows()
    return {"seconds": seconds, "peak_per_process": peaks, "rows": rows,
            "log": proc.stderr.splitlines()[:1] + [last]}


def child(args: argparse.Namespace) -> None:
    if args.mode == "single":
        res = run_single(args.src, args.out)
    elif args.mode.startswith("dask-"):
        res = run_dask(args.src, args.out, int(args.mode.split("-")[1]))
    else:
        res = run_big(args.src, args.out, args.big_memory, 2, args.derivation)
    print(json.dumps(res))


def spawn(mode: str, src: str, out: str, **extra: str) -> dict[str, Any]:
    command = [sys.executable, __file__, "--child", mode, "--src", src, "--out", out]
    for k, v in extra.items():
        command += [f"--{k.replace('_', '-')}", v]
    proc = subprocess.run(command, capture_output=True, text=True)
    if proc.returncode != 0:
        raise RuntimeError(f"{mode} failed:\n{proc.stderr[-3000:]}")
    shutil.rmtree(out, ignore_errors=True) if os.path.isdir(out) else os.path.exists(out) and os.remove(out)
    return json.loads(proc.stdout.strip().splitlines()[-1])


def gib(b: float) -> str:
    return f"{b / 2**30:.2f}"


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--rows", default="2000000", help="comma-separated row counts (empty: none)")
    p.add_argument("--big", type=int, default=0, help="rows of the bigger-than-memory run (0: skip)")
    p.add_argument("--big-memory", default="4GB", help="memory budget of the bigger-than-memory run")
    p.add_argument("--tmp", default=None, help="folder for the Parquet files (default: system temp)")
    p.add_argument("--child", dest="mode", default=None, help=argparse.SUPPRESS)
    p.add_argument("--src", help=argparse.SUPPRESS)
    p.add_argument("--out", help=argparse.SUPPRESS)
    p.add_argument("--derivation", help=argparse.SUPPRESS)
    args = p.parse_args()
    if args.mode:
        child(args)
        return
    tmp = tempfile.mkdtemp(prefix="panelfx-dask-bench-", dir=args.tmp)
    report: dict[str, Any] = {"machine": {"cpus": os.cpu_count()}, "runs": {}}
    try:
        for rows in [int(r) for r in args.rows.split(",") if r]:
            src = os.path.join(tmp, f"panel-{rows}")
            files = max(2, rows // 500_000)  # a folder of files, as a cluster would read it
            write_panel(src, rows, files=files)
            runs = {mode: spawn(mode, src, os.path.join(tmp, f"out-{mode}")) for mode in ("single", "dask-1", "dask-2")}
            report["runs"][rows] = runs
            base = runs["single"]["seconds"]
            print(f"\n{rows:,} rows ({files} input files)")
            print(f"{'run':<8} {'seconds':>8} {'x single':>9} {'peak GiB per process':>22} {'shuffle share':>14}")
            for mode, r in runs.items():
                share = f"{r['shuffle_share']:.0%}" if "shuffle_share" in r else ""
                peaks = ", ".join(gib(b) for b in r["peak_per_process"])
                print(f"{mode:<8} {r['seconds']:8.2f} {r['seconds'] / base:9.2f} {peaks:>22} {share:>14}")
            shutil.rmtree(src)
        if args.big:
            src = os.path.join(tmp, "big.parquet")
            t0 = time.perf_counter()
            rows = write_panel(src, args.big)
            made = time.perf_counter() - t0
            spec = os.path.join(tmp, "job.json")
            derivation().save(spec)
            r = spawn("bigger", src, os.path.join(tmp, "out-big"), big_memory=args.big_memory, derivation=spec)
            r["generate_seconds"] = made
            r["input_bytes"] = os.path.getsize(src)
            report["runs"]["bigger"] = r
            print(f"\nbigger than memory: {rows:,} rows ({r['input_bytes'] / 2**30:.1f} GiB of Parquet), "
                  f"--memory {args.big_memory} --workers 2: {r['seconds']:.0f} s, peak GiB of the main process "
                  f"and of the largest worker: {', '.join(gib(b) for b in r['peak_per_process'])}, "
                  f"{r['rows']:,} rows written")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("\n" + json.dumps(report, default=str))


if __name__ == "__main__":
    main()
