"""``panelfx apply`` on Parquet data bigger than memory: hash partitions on disk, then one at a time.

Every transform reads only its own subject's rows, so the work splits by subject:

1. **Partition pass**: the input (a Parquet file or a folder of Parquet files) is read in
   batches; each row goes to bucket ``subject_hash(id) % n`` (:mod:`panelfx._partition`),
   appended to that bucket's temporary Parquet file.  Rows keep their input order within a
   bucket.  Memory: a few batches plus the buckets' write buffers (an eighth of the budget).
2. **Per-partition pass**: each bucket is read into pandas, the derivation applied by
   panelfx's own engine, and the result written as ``part-NNNNN.parquet``.  ``workers`` > 1
   runs that many buckets at once on Dask's local scheduler (processes), each within its
   share of the memory budget.

``n`` is chosen so that one bucket's work fits the budget (an estimate from the Parquet
metadata: the uncompressed size of a row, plus the derived columns and the engine's working
arrays), or given.  The output is a folder of parts, written into a temporary folder beside
the target and renamed into place only when every part is complete: a failed or killed run
never leaves a partial folder where the output belongs (a killed run may leave its hidden
temporary folder, named ``.<name>.*.panelfx-tmp``, which is safe to delete).  An existing
output folder is replaced only when a previous ``apply`` made it (it holds ``_panelfx.json``).

The values equal the in-memory path's.  Dtypes are held to one schema for all parts,
predicted before the work (:mod:`panelfx._schema`): an integer column with a missing value
anywhere in the input is float64 in every part, as when the whole file is read at once; a
column copied from an integer or boolean column (lag, baseline, carry forward) is float64 /
object in every part.  Rows come bucket by bucket, in input order within each; ``row_number``
adds each row's 0-based number in the input (files of a folder in pyarrow's listing order)
so that readers can restore the input order.
"""

from __future__ import annotations

import functools
import json
import math
import os
import shutil
import tempfile
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._partition import subject_hash
from ._schema import conform, predict_outputs
from .derivation import ATTRS_KEY, Derivation
from .errors import MissingColumnError, OptionError

__all__ = ["apply_partitioned", "plan_partitions", "MARKER", "parse_size"]

#: File in an output folder that marks it as made by ``panelfx apply`` (readers skip "_" files).
MARKER = "_panelfx.json"
#: Rows per batch read in the partition pass.
BATCH_ROWS = 65_536
#: Memory of one partition's work per row (bytes): three copies of the input row (Arrow, pandas,
#: Arrow again to write), the engine's working arrays, and each derived column with its copies.
#: Calibrated on the benchmark's panel (about 560 bytes a row for nine derived columns).
INPUT_COPIES = 3
ENGINE_ROW_BYTES = 200
ENGINE_COLUMN_BYTES = 40
#: A worker process's own memory (Python, pandas, pyarrow, panelfx) before any data.
PROCESS_BYTES = 256 * 2**20
#: At most this many buckets (each has an open file in the partition pass).
MAX_PARTITIONS = 4096

UNITS = {"": 1, "B": 1, "K": 2**10, "KB": 2**10, "M": 2**20, "MB": 2**20, "G": 2**30, "GB": 2**30,
         "T": 2**40, "TB": 2**40, "KIB": 2**10, "MIB": 2**20, "GIB": 2**30, "TIB": 2**40}


def parse_size(text: str) -> int:
    """``"2GB"``, ``"512M"``, ``"1.5G"`` or a number of bytes -> bytes (powers of 1024)."""
    t = text.strip().upper().replace(" ", "")
    number = t.rstrip("KMGTIB")
    unit = t[len(number):]
    try:
        value = float(number)
    except ValueError:
        value = -1.0
    if unit not in UNITS or not value > 0:
        raise OptionError(f"memory must be a size such as 2GB or 512MB, got {text!r}")
    return int(value * UNITS[unit])


def _dataset(path: str) -> Any:
    import pyarrow.dataset as ds

    if not os.path.exists(path):
        raise FileNotFoundError(f"input {path!r} does not exist")
    return ds.dataset(path, format="parquet", partitioning="hive" if os.path.isdir(path) else None)


def _row_group_sizes(dataset: Any) -> tuple[int, int]:
    """(rows, uncompressed bytes) from the Parquet footers, without reading data."""
    rows = size = 0
    for fragment in dataset.get_fragments():
        meta = fragment.metadata
        rows += meta.num_rows
        size += sum(meta.row_group(i).total_byte_size for i in range(meta.num_row_groups))
    return rows, size


def plan_partitions(rows: int, input_bytes: int, n_outputs: int, budget: int) -> int:
    """How many buckets make one bucket's work fit ``budget`` bytes."""
    per_row = INPUT_COPIES * input_bytes / max(rows, 1) + ENGINE_ROW_BYTES + ENGINE_COLUMN_BYTES * n_outputs
    usable = max(budget - PROCESS_BYTES, budget // 4, 1)
    return max(1, min(MAX_PARTITIONS, math.ceil(rows * per_row / usable)))


def _input_meta(schema: Any, null_counts: dict[str, int]) -> pd.DataFrame:
    """The empty frame with the dtypes the whole input would have in pandas (read at once)."""

    meta = schema.empty_table().to_pandas(date_as_object=False)
    for name, nulls in null_counts.items():
        if nulls and name in meta.columns and isinstance(meta[name].dtype, np.dtype):
            # pandas reads a numpy-typed int column with a missing value as floats, bools as objects
            if meta[name].dtype.kind in "iu":
                meta[name] = meta[name].astype("float64")
            elif meta[name].dtype.kind == "b":
                meta[name] = meta[name].astype(object)
    return meta


def apply_partitioned(
    derivation: Derivation,
    source: str,
    target: str,
    *,
    memory: int,
    partitions: int | None = None,
    workers: int = 1,
    row_number: str | None = None,
    progress: Any = None,
) -> dict[str, Any]:
    """Apply ``derivation`` to the Parquet data at ``source``, writing a folder of parts at
    ``target`` (see the module docstring).  Returns counts: rows, partitions."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    say = progress.say if progress is not None else (lambda text: None)
    if workers < 1:
        raise OptionError(f"workers must be at least 1, got {workers}")
    target = os.path.abspath(target)
    _check_target(target)
    dataset = _dataset(source)
    schema = dataset.schema
    need = [*derivation.id_cols, derivation.time, *derivation.inputs()]
    missing = [c for c in need if c not in schema.names]
    if missing:
        raise MissingColumnError(f"column {missing[0]!r} is not in {source} (columns: {schema.names[:20]})",
                                 column=missing[0], count=len(missing))
    if row_number is not None and (row_number in schema.names or row_number in derivation.outputs()):
        raise OptionError(f"--row-number column {row_number!r} already exists")
    rows, size = _row_group_sizes(dataset)
    n = partitions or plan_partitions(rows, size, len(derivation.outputs()), memory // workers)
    # Fail fast on the derivation and the schema, before any data is read (an all-null guess).
    predict_outputs(_input_meta(schema, {}), derivation.transforms, derivation.id_cols, derivation.time,
                    derivation.unit, order=derivation.order, time_unit=derivation.time_unit)
    say(f"{rows:,} rows in {source}: {n} partition(s) by subject, {workers} worker(s)")

    folder, base = os.path.split(target)
    tmp = tempfile.mkdtemp(prefix=f".{base}.", suffix=".panelfx-tmp", dir=folder)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o777 & ~umask)  # a folder like any other, once renamed into place
    try:
        buckets = os.path.join(tmp, "_buckets")
        os.mkdir(buckets)
        nulls = _partition_pass(dataset, derivation.id_cols, n, buckets, memory // 8, row_number, say, rows)
        pa.default_memory_pool().release_unused()  # give the pass's buffers back before the workers start
        meta_in = _input_meta(schema, nulls)
        if row_number is not None:
            meta_in[row_number] = pd.Series([], dtype="int64")
        outputs = predict_outputs(meta_in, derivation.transforms, derivation.id_cols, derivation.time,
                                  derivation.unit, order=derivation.order, time_unit=derivation.time_unit)
        meta_out = meta_in.copy()
        for name, dtype in outputs.items():
            meta_out[name] = pd.Series(pd.array([], dtype=dtype))
        if row_number is not None:  # the row number goes last, after the derived columns
            meta_out = meta_out[[c for c in meta_out.columns if c != row_number] + [row_number]]
        record = {"derivation": derivation.to_dict(), "input": os.path.basename(os.path.abspath(source))}
        jobs = [(i, os.path.join(buckets, f"b{i:05d}.parquet"), os.path.join(tmp, f"part-{i:05d}.parquet"))
                for i in range(n) if os.path.exists(os.path.join(buckets, f"b{i:05d}.parquet"))]
        done, worker_peak = _run_jobs(jobs, derivation.to_json(), meta_in, meta_out, record, row_number, workers,
                                      say, rows)
        if not jobs:  # an empty input: one empty part keeps the schema
            empty = pa.Table.from_pandas(meta_out, preserve_index=False)
            pq.write_table(empty, os.path.join(tmp, "part-00000.parquet"))
        shutil.rmtree(buckets)
        summary = {**record, "rows": int(done), "partitions": n, "parts": max(len(jobs), 1)}
        with open(os.path.join(tmp, MARKER), "w", encoding="utf-8") as fh:
            json.dump(summary, fh, indent=2, default=str)
        _swap_into_place(tmp, target)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    say(f"wrote {done:,} rows in {max(len(jobs), 1)} part(s) to {target}{os.sep}; peak memory "
        f"{_peak_bytes() / 2**30:.2f} GiB in this process" + (f", {worker_peak / 2**30:.2f} GiB in the largest worker"
                                                             if workers > 1 else ""))
    return {"rows": int(done), "partitions": n, "peak": _peak_bytes(), "worker_peak": worker_peak}


def _check_target(target: str) -> None:
    if os.path.isfile(target):
        raise OptionError(f"output {target!r} is a file; a partitioned apply writes a folder of Parquet parts")
    if os.path.isdir(target) and os.listdir(target) and not os.path.exists(os.path.join(target, MARKER)):
        raise OptionError(f"output folder {target!r} exists and was not written by panelfx apply (no {MARKER}); "
                          f"choose another or remove it")
    folder = os.path.dirname(target)
    if not os.path.isdir(folder):
        raise FileNotFoundError(f"output folder {folder!r} does not exist")


def _swap_into_place(tmp: str, target: str) -> None:
    """``tmp`` becomes ``target``; a previous output folder there is removed only afterwards."""
    if os.path.isdir(target):
        old = tempfile.mkdtemp(prefix=f".{os.path.basename(target)}.", suffix=".panelfx-old",
                               dir=os.path.dirname(target))
        os.rmdir(old)
        os.replace(target, old)
        os.replace(tmp, target)
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, target)


def _partition_pass(dataset: Any, id_cols: Sequence[str], n: int, folder: str, buffer_bytes: int,
                    row_number: str | None, say: Any, total: int) -> dict[str, int]:
    """Stream the input into ``n`` bucket files; returns the null count of every column."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    metadata = dataset.schema.metadata
    writers: dict[int, Any] = {}
    pending: dict[int, list[Any]] = {}
    pending_bytes = 0
    nulls: dict[str, int] = {}
    done = 0
    step = 10 * BATCH_ROWS * 16

    def flush(keys: Sequence[int]) -> None:
        for k in keys:
            # the input's schema metadata (pandas dtypes such as Int64) goes with the rows
            table = pa.Table.from_batches(pending.pop(k)).replace_schema_metadata(metadata)
            if k not in writers:
                writers[k] = pq.ParquetWriter(os.path.join(folder, f"b{k:05d}.parquet"), table.schema)
            writers[k].write_table(table)

    try:
        # Little read-ahead and no pre-buffering: the scanner would otherwise hold many row
        # groups of a large file at once (measured: 3.9 GiB for a 3 GiB file).
        import pyarrow.dataset as ds

        scan = ds.ParquetFragmentScanOptions(pre_buffer=False)
        for batch in dataset.to_batches(batch_size=BATCH_ROWS, batch_readahead=2, fragment_readahead=1,
                                        fragment_scan_options=scan):
            for name, col in zip(batch.schema.names, batch.columns):
                nulls[name] = nulls.get(name, 0) + col.null_count
            if row_number is not None:
                batch = batch.append_column(row_number, pa.array(np.arange(done, done + batch.num_rows)))
            ids = batch.select(list(id_cols)).to_pandas(date_as_object=False)
            bucket = (subject_hash(ids, id_cols) % np.uint64(n)).astype(np.int64)
            order = np.argsort(bucket, kind="stable")  # input order kept within each bucket
            counts = np.bincount(bucket, minlength=n)
            sorted_batch = batch.take(pa.array(order))
            start = 0
            for k in np.flatnonzero(counts):
                part = sorted_batch.slice(start, int(counts[k]))
                start += int(counts[k])
                pending.setdefault(int(k), []).append(part)
                pending_bytes += part.nbytes
            if pending_bytes > buffer_bytes:
                flush(list(pending))
                pending_bytes = 0
            before, done = done, done + batch.num_rows
            if done // step > before // step:
                say(f"partitioning: read {done:,} of {total:,} rows")
        flush(list(pending))
    finally:
        for w in writers.values():
            w.close()
    return nulls


@functools.lru_cache(maxsize=8)
def parse_once(spec: str) -> Derivation:
    """The saved derivation, parsed once per process."""
    return Derivation.from_json(spec)


def work_partition(job: tuple[int, str, str], spec: str, meta_in: pd.DataFrame, meta_out: pd.DataFrame,
                   record: dict[str, Any], row_number: str | None) -> tuple[int, int]:
    """One bucket: read, derive with panelfx's engine, write its part; returns its rows and
    the peak memory of the process that did it.
    Module-level so that Dask's process scheduler can run it in another process."""
    import pyarrow.parquet as pq

    from .cli import write_frame

    _, bucket, part = job
    frame = pq.read_table(bucket).to_pandas(date_as_object=False)
    frame = conform(frame, meta_in)  # the dtypes the whole input has (ints with a missing value as floats)
    d = parse_once(spec)
    values = frame.drop(columns=[row_number]) if row_number is not None else frame
    out = d.apply(values)
    if row_number is not None:
        out[row_number] = frame[row_number].to_numpy()
    out = conform(out, meta_out)
    info = {**record, "dictionary": out.attrs[ATTRS_KEY]["dictionary"]} if ATTRS_KEY in out.attrs else record
    fields = {row["column"]: {k: v for k, v in row.items() if k != "column"} for row in info.get("dictionary", [])}
    write_frame(out, part, "parquet", metadata=info, field_metadata=fields)
    rows = len(out)
    del frame, values, out
    import pyarrow as pa

    pa.default_memory_pool().release_unused()  # the next partition of this process starts from little
    return rows, _peak_bytes()


def _peak_bytes() -> int:
    """This process's peak resident size so far (Linux; 0 elsewhere).  Read from /proc, not
    from getrusage, whose peak a spawned worker inherits from the process that started it."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:  # pragma: no cover - not Linux
        pass
    return 0  # pragma: no cover


def _run_jobs(jobs: list[tuple[int, str, str]], spec: str, meta_in: pd.DataFrame, meta_out: pd.DataFrame,
              record: dict[str, Any], row_number: str | None, workers: int, say: Any,
              total: int) -> tuple[int, int]:
    state = {"parts": 0, "rows": 0, "peak": 0}

    def finished(result: tuple[int, int]) -> None:
        rows, peak = result
        state["parts"] += 1
        state["rows"] += rows
        state["peak"] = max(state["peak"], peak)
        say(f"partition {state['parts']} of {len(jobs)} done: {state['rows']:,} of {total:,} rows")

    if workers == 1 or len(jobs) <= 1:
        for job in jobs:
            finished(work_partition(job, spec, meta_in, meta_out, record, row_number))
        return state["rows"], state["peak"]
    try:
        import dask
        from dask.callbacks import Callback
    except ImportError as err:  # pragma: no cover - the extra is not installed
        raise OptionError("--workers above 1 runs partitions on Dask's local scheduler: "
                          "pip install 'panelfx[dask]'") from err

    class Report(Callback):
        def _posttask(self, key: Any, result: Any, dsk: Any, state_: Any, id: Any) -> None:
            if str(key).startswith("panelfx-part-"):
                finished(result)

    tasks = [dask.delayed(work_partition, pure=False)(job, spec, meta_in, meta_out, record, row_number,
                                                      dask_key_name=f"panelfx-part-{job[0]}") for job in jobs]
    with Report():
        results = dask.compute(*tasks, scheduler="processes", num_workers=workers)
    return int(sum(r[0] for r in results)), max(r[1] for r in results)
