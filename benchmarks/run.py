"""Benchmark: panelfx against what users would write instead.

Generates a reproducible synthetic panel (invented data: subjects with a random number
of occasions at irregular integer days, an outcome ``y`` with about 5% missing values,
a ``dose`` column and a rare ``event`` flag; rows shuffled) and runs the same job in
several engines:

- ``panelfx``: one ``derive`` call with all transforms;
- ``numpy``: a minimal hand-written kernel on the sorted arrays (the practical floor);
- ``pandas``: idiomatic groupby transform / shift / diff / cumsum / rolling;
- ``polars``: window expressions over the id;
- ``duckdb``: window SQL.

The job: baseline (first non-missing), change from baseline, change from previous,
lag 1, cumulative sum and trapezoid area of dose, time since the most recent event,
rolling mean over the last 90 days and over the last 3 occasions.

Every engine first runs the whole job once in a fresh process (the cold run); its
outputs are checked against the numpy floor before anything else is timed.  Then each
single transform runs once in a fresh process (cold time and peak memory), and one more
process times the whole job and every transform warm (best of several runs).  Each
engine runs in its own processes, so memory peaks do not mix.  Peak memory is the
process's peak resident size during the run minus its resident size just before it.

Usage (from the repository folder, after ``pip install -e '.[bench]'``)::

    python benchmarks/run.py                 # N = 200,000 subjects, about 2M rows
    python benchmarks/run.py --n 2000000 --engines panelfx,numpy --variants shuffled

Not a test: nothing here asserts a speed.  ``tests/test_benchmark_engines.py`` runs the
agreement check on a tiny panel so that the comparison code cannot rot.
"""

from __future__ import annotations

import argparse
import gc
import json
import math
import os
import platform
import re
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from typing import Any

import numpy as np

#: The job, in order: key -> what it computes.
JOB: dict[str, str] = {
    "baseline": "first non-missing y of the subject",
    "change_from_baseline": "y - baseline",
    "change_from_previous": "y - y at the previous occasion",
    "lag": "y at the previous occasion",
    "cumulative_sum": "running sum of dose",
    "cumulative_area": "trapezoid area under dose over time",
    "time_since": "days since the most recent event (at or before)",
    "rolling_90": "mean of non-missing y over (t - 90, t]",
    "rolling_3": "mean of non-missing y over the last 3 occasions",
}
SPAN = 90
OCCASIONS = 3
ENGINES = ("numpy", "panelfx", "panelfx1", "polars", "duckdb", "pandas")


# ----------------------------------------------------------------------------- data
def make_panel(n: int, seed: int = 2024, *, shuffled: bool = True) -> dict[str, np.ndarray]:
    """The synthetic panel as numpy arrays (invented data).

    n subjects with 1 + Poisson(9) occasions (mean 10) at integer days: a random start in
    [0, 60) then gaps of 1 to 60 days.  ``y`` is normal(120, 15) with 5% missing (NaN);
    ``dose`` a gamma amount rounded to 0.1; ``event`` true on about 3% of occasions.
    Subject ids are increasing but not consecutive.  The sorted variant comes in
    (id, time) order; the shuffled one is the same rows in a random order.
    """
    rng = np.random.default_rng(seed)
    k = 1 + rng.poisson(9, n)
    rows = int(k.sum())
    ids = 100_000 + np.cumsum(rng.integers(1, 4, n))
    first = np.zeros(rows, dtype=bool)
    first[np.cumsum(k) - k] = True
    gap = rng.integers(1, 61, rows)
    gap[first] = 0
    c = np.cumsum(gap)
    t = c - np.repeat(c[first], k) + np.repeat(rng.integers(0, 60, n), k)
    y = rng.normal(120.0, 15.0, rows)
    y[rng.random(rows) < 0.05] = np.nan
    data = {
        "id": np.repeat(ids, k).astype(np.int64),
        "t": t.astype(np.int64),
        "y": y,
        "dose": rng.gamma(2.0, 25.0, rows).round(1),
        "event": rng.random(rows) < 0.03,
    }
    if shuffled:
        perm = rng.permutation(rows)
        data = {name: col[perm] for name, col in data.items()}
    return data


def output_bytes(rows: int, keys: list[str]) -> int:
    """Size of the derived outputs: one float64 column per transform."""
    return rows * 8 * len(keys)


# ----------------------------------------------------------------------------- engines
class Engine:
    """One way of doing the job.  ``prepare`` (untimed) turns the numpy arrays into the
    engine's own frame; ``run`` (timed) computes the transforms ``keys`` and returns the
    engine's natural result; ``extract`` (untimed) gives float64 arrays in row order."""

    name = ""

    def prepare(self, data: dict[str, np.ndarray]) -> Any:
        raise NotImplementedError

    def run(self, frame: Any, keys: list[str]) -> Any:
        raise NotImplementedError

    def extract(self, result: Any, keys: list[str]) -> dict[str, np.ndarray]:
        raise NotImplementedError

    def available(self) -> list[str]:
        return list(JOB)


def _pandas_frame(data: dict[str, np.ndarray]) -> Any:
    import pandas as pd

    return pd.DataFrame(data)


class PanelfxEngine(Engine):
    """One ``derive`` call with every transform of the job."""

    name = "panelfx"

    def _transforms(self) -> dict[str, Any]:
        import panelfx as pfx

        out: dict[str, Any] = {
            "baseline": lambda: pfx.baseline("y"),
            "change_from_baseline": lambda: pfx.change_from_baseline("y"),
            "change_from_previous": lambda: pfx.change_from_previous("y"),
            "lag": lambda: pfx.lag("y"),
        }
        # Transforms written by other work in progress are wired in when they exist.
        if hasattr(pfx, "cumulative"):
            out["cumulative_sum"] = lambda: pfx.cumulative("dose", method="sum")
            out["cumulative_area"] = lambda: pfx.cumulative("dose", method="trapezoid")
        if hasattr(pfx, "time_since"):
            out["time_since"] = lambda: pfx.time_since("event", which="last")
        if hasattr(pfx, "rolling"):
            out["rolling_90"] = lambda: pfx.rolling("y", stat="mean", span=SPAN)
            out["rolling_3"] = lambda: pfx.rolling("y", stat="mean", occasions=OCCASIONS)
        return out

    def available(self) -> list[str]:
        return [k for k in JOB if k in self._transforms()]

    def prepare(self, data: dict[str, np.ndarray]) -> Any:
        return _pandas_frame(data)

    def run(self, frame: Any, keys: list[str]) -> Any:
        import panelfx as pfx

        makers = self._transforms()
        return pfx.derive(frame, *(makers[k]() for k in keys), id="id", time="t")

    def extract(self, result: Any, keys: list[str]) -> dict[str, np.ndarray]:
        makers = self._transforms()
        names = [makers[k]().outputs()[0] for k in keys]
        return {k: result[c].to_numpy(dtype="float64", na_value=np.nan) for k, c in zip(keys, names)}


class NumpyEngine(Engine):
    """The floor: order once with one combined integer key, vectorised kernels on the
    sorted arrays, scatter back.  Integer ids and integer days only (no validation, no
    factorising, no generality).  Running sums get the one refinement pass that keeps
    them accurate to a per-subject sum (the job asks for that accuracy)."""

    name = "numpy"

    def prepare(self, data: dict[str, np.ndarray]) -> Any:
        return _pandas_frame(data)

    def run(self, frame: Any, keys: list[str]) -> Any:
        ids = frame["id"].to_numpy()
        t = frame["t"].to_numpy()
        n = len(ids)
        tmin = t.min()
        # Each subject's keys lie in its own block, padded so that key - 89 (the start of a
        # 90-day window) never reaches the previous subject's block.
        width = int(t.max() - tmin) + 1 + SPAN
        key = (ids - ids.min()) * width + (t - tmin + SPAN)
        if n < 2 or np.all(key[1:] > key[:-1]):
            order = None
        else:
            # Sort the key with the row number packed into its low bits: np.sort is about
            # twice as fast as np.argsort, and the row number makes ties stable.
            bits = max(int(n - 1).bit_length(), 1)
            key <<= bits
            key |= np.arange(n)
            key.sort()
            order = key & ((1 << bits) - 1)
            key >>= bits
        want = set(keys)
        out: dict[str, np.ndarray] = {}

        def sort(col: str) -> np.ndarray:
            v = frame[col].to_numpy()
            return v if order is None else v[order]

        def put(k: str, v: np.ndarray) -> None:
            """Keep an output, in the caller's row order."""
            if k in want:
                if order is not None:
                    back = np.empty_like(v)
                    back[order] = v
                    v = back
                out[k] = v

        ts = (key % width).astype(np.float64)  # times relative to tmin - SPAN: differences only
        start = np.empty(n, dtype=bool)
        start[:1] = True
        np.not_equal(key[1:] // width, key[:-1] // width, out=start[1:])
        starts = np.flatnonzero(start)
        grp = np.cumsum(start) - 1
        y = sort("y") if want - {"cumulative_sum", "cumulative_area", "time_since"} else None
        if want & {"baseline", "change_from_baseline"}:
            b = np.minimum.reduceat(np.where(np.isnan(y), n, np.arange(n)), starts)[grp]
            base = y[np.minimum(b, n - 1)]
            base[b == n] = np.nan
            del b
            put("baseline", base)
            put("change_from_baseline", y - base)
            del base
        if want & {"lag", "change_from_previous"}:
            lag = np.empty(n)
            lag[1:] = y[:-1]
            lag[start] = np.nan
            put("change_from_previous", y - lag)
            put("lag", lag)
            del lag
        if want & {"cumulative_sum", "cumulative_area"}:
            d = sort("dose")
            if "cumulative_sum" in want:
                put("cumulative_sum", _segmented_cumsum(d, starts, grp))
            if "cumulative_area" in want:
                step = np.empty(n)
                np.subtract(ts[1:], ts[:-1], out=step[1:])
                step[1:] *= d[1:] + d[:-1]
                step *= 0.5
                step[start] = 0.0
                put("cumulative_area", _segmented_cumsum(step, starts, grp))
                del step
            del d
        if "time_since" in want:
            last = np.maximum.accumulate(np.where(sort("event"), np.arange(n), -1))
            since = ts - ts[np.maximum(last, 0)]
            since[(last < 0) | (grp[np.maximum(last, 0)] != grp)] = np.nan
            del last
            put("time_since", since)
            del since
        if want & {"rolling_90", "rolling_3"}:
            ok = ~np.isnan(y)
            y0 = np.where(ok, y, 0.0)
            if "rolling_90" in want:
                # First row of the window (t - 90, t]: one global search on the key.
                j = np.searchsorted(key, key - (SPAN - 1), side="left")
                s = _segmented_cumsum(y0, starts, grp)
                c = np.cumsum(ok)
                # window sum = running sum here minus the running sum just before row j
                num = s - (s[j] - y0[j])
                del s
                cnt = c - c[j] + ok[j]
                del c, j
                with np.errstate(invalid="ignore", divide="ignore"):
                    num /= cnt
                del cnt
                put("rolling_90", num)
                del num
            if "rolling_3" in want:
                tot = y0.copy()
                cnt = ok.astype(np.int64)
                for k in range(1, OCCASIONS):
                    same = grp[k:] == grp[:-k]
                    tot[k:] += np.where(same, y0[:-k], 0.0)
                    cnt[k:] += same & ok[:-k]
                with np.errstate(invalid="ignore", divide="ignore"):
                    tot /= cnt
                del cnt
                put("rolling_3", tot)
                del tot
        del y, key, ts, grp, start
        result = frame.copy(deep=False)
        for k in keys:
            result[k] = out.pop(k)
        return result

    def extract(self, result: Any, keys: list[str]) -> dict[str, np.ndarray]:
        return {k: result[k].to_numpy(dtype="float64", na_value=np.nan) for k in keys}


def _segmented_cumsum(v: np.ndarray, starts: np.ndarray, grp: np.ndarray) -> np.ndarray:
    """Running sum within subject: a global cumsum minus each subject's offset, plus one
    pass on the residuals (the offsets alone lose digits as the grand total grows)."""
    c = np.cumsum(v)
    s = c - (c[starts] - v[starts])[grp]
    step = np.empty_like(s)
    step[0] = s[0]
    np.subtract(s[1:], s[:-1], out=step[1:])
    step[starts] = s[starts]
    r = v - step
    cr = np.cumsum(r)
    return s + (cr - (cr[starts] - r[starts])[grp])


class PandasEngine(Engine):
    """Idiomatic pandas, as a competent analyst writes it: sort, group by subject, one
    groupby operation per variable, then assign back (aligned on the index)."""

    name = "pandas"

    def prepare(self, data: dict[str, np.ndarray]) -> Any:
        return _pandas_frame(data)

    def run(self, frame: Any, keys: list[str]) -> Any:
        import pandas as pd

        d = frame.sort_values(["id", "t"])
        g = d.groupby("id")
        new: dict[str, Any] = {}
        if {"baseline", "change_from_baseline"} & set(keys):
            base = g["y"].transform("first")  # groupby first skips missing values
            if "baseline" in keys:
                new["baseline"] = base
            if "change_from_baseline" in keys:
                new["change_from_baseline"] = d["y"] - base
        if "change_from_previous" in keys:
            new["change_from_previous"] = g["y"].diff()
        if "lag" in keys:
            new["lag"] = g["y"].shift(1)
        if "cumulative_sum" in keys:
            new["cumulative_sum"] = g["dose"].cumsum()
        if "cumulative_area" in keys:
            step = g["t"].diff() * (d["dose"] + g["dose"].shift(1)) / 2
            new["cumulative_area"] = step.fillna(0.0).groupby(d["id"]).cumsum()
        if "time_since" in keys:
            last = d["t"].where(d["event"]).groupby(d["id"]).ffill()
            new["time_since"] = d["t"] - last
        if "rolling_90" in keys:
            # Time-based windows need datetimes.  The result is indexed by (id, date), not
            # by row label; it comes group by group in id order, which is d's order.
            dd = d.assign(date=pd.to_datetime(d["t"], unit="D"))
            r = dd.groupby("id").rolling(f"{SPAN}D", on="date")["y"].mean()
            new["rolling_90"] = pd.Series(r.to_numpy(), index=d.index)
        if "rolling_3" in keys:
            new["rolling_3"] = g["y"].rolling(OCCASIONS, min_periods=1).mean().droplevel(0)
        return frame.assign(**{k: new[k] for k in keys})

    def extract(self, result: Any, keys: list[str]) -> dict[str, np.ndarray]:
        return {k: result[k].to_numpy(dtype="float64", na_value=np.nan) for k in keys}


class PolarsEngine(Engine):
    """Polars window expressions over the id, ordered by time (row order kept)."""

    name = "polars"

    def prepare(self, data: dict[str, np.ndarray]) -> Any:
        import polars as pl

        # Polars treats NaN as a value, not as missing: build the frame with nulls.
        return pl.DataFrame({c: pl.Series(c, v, nan_to_null=v.dtype.kind == "f") for c, v in data.items()})

    def _exprs(self) -> dict[str, Any]:
        import polars as pl

        y, t, dose = pl.col("y"), pl.col("t"), pl.col("dose")
        w = dict(partition_by="id", order_by="t")
        base = y.drop_nulls().first().over(**w)
        return {
            "baseline": base,
            "change_from_baseline": y - base,
            "change_from_previous": y.diff().over(**w),
            "lag": y.shift(1).over(**w),
            "cumulative_sum": dose.cum_sum().over(**w),
            "cumulative_area": ((t.diff() * (dose + dose.shift(1)) / 2).fill_null(0.0).cum_sum()).over(**w),
            "time_since": t - pl.when(pl.col("event")).then(t).forward_fill().over(**w),
            "rolling_90": y.rolling_mean_by("t", window_size=f"{SPAN}i").over(**w),
            "rolling_3": y.rolling_mean(OCCASIONS, min_samples=1).over(**w),
        }

    def run(self, frame: Any, keys: list[str]) -> Any:
        exprs = self._exprs()
        return frame.with_columns(**{k: exprs[k] for k in keys})

    def extract(self, result: Any, keys: list[str]) -> dict[str, np.ndarray]:
        return {k: result[k].cast(float).fill_null(np.nan).to_numpy() for k in keys}


class DuckdbEngine(Engine):
    """DuckDB window SQL over a table holding the panel; the result comes back in the
    input's row order as an Arrow table of the derived columns."""

    name = "duckdb"

    #: key -> (window expressions of the first level, final expression).
    PARTS: dict[str, tuple[dict[str, str], str]] = {
        "baseline": ({"base": "first_value(y IGNORE NULLS) OVER (PARTITION BY id ORDER BY t "
                              "ROWS BETWEEN UNBOUNDED PRECEDING AND UNBOUNDED FOLLOWING)"}, "base"),
        "change_from_baseline": ({"base": "first_value(y IGNORE NULLS) OVER (PARTITION BY id ORDER BY t "
                                          "ROWS BETWEEN UNBOUNDED PRECEDING AND UNBOUNDED FOLLOWING)"}, "y - base"),
        "change_from_previous": ({"lag1": "lag(y) OVER w"}, "y - lag1"),
        "lag": ({"lag1": "lag(y) OVER w"}, "lag1"),
        "cumulative_sum": ({"cum": "sum(dose) OVER (w ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW)"}, "cum"),
        # Window functions cannot be nested: the area's steps are summed at the second level.
        "cumulative_area": ({"step": "(t - lag(t) OVER w) * (dose + lag(dose) OVER w) / 2"},
                            "coalesce(sum(step) OVER (w ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW), 0)"),
        "time_since": ({"last_event": "last_value(CASE WHEN event THEN t END IGNORE NULLS) "
                                      "OVER (w ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW)"},
                       "t - last_event"),
        # RANGE frames are closed at both ends: (t - 90, t] on integer days is [t - 89, t].
        "rolling_90": ({"r90": f"avg(y) OVER (PARTITION BY id ORDER BY t RANGE BETWEEN {SPAN - 1} PRECEDING "
                               f"AND CURRENT ROW)"}, "r90"),
        "rolling_3": ({"r3": f"avg(y) OVER (w ROWS BETWEEN {OCCASIONS - 1} PRECEDING AND CURRENT ROW)"}, "r3"),
    }

    def prepare(self, data: dict[str, np.ndarray]) -> Any:
        import duckdb
        import pandas as pd

        con = duckdb.connect()
        df = pd.DataFrame({"rid": np.arange(len(data["id"])), **data})  # NaN in pandas reaches DuckDB as NULL
        con.register("src", df)
        con.execute("CREATE TABLE panel AS SELECT * FROM src")
        con.unregister("src")
        return con

    def sql(self, keys: list[str]) -> str:
        first: dict[str, str] = {}
        for k in keys:
            first.update(self.PARTS[k][0])
        inner = ", ".join(f"{e} AS {a}" for a, e in first.items())
        outer = ", ".join(f"{self.PARTS[k][1]} AS {k}" for k in keys)
        return (f"WITH a AS (SELECT rid, id, t, y, dose, {inner} FROM panel WINDOW w AS (PARTITION BY id ORDER BY t)) "
                f"SELECT {outer} FROM a WINDOW w AS (PARTITION BY id ORDER BY t) ORDER BY rid")

    def run(self, con: Any, keys: list[str]) -> Any:
        return con.sql(self.sql(keys)).to_arrow_table()

    def extract(self, result: Any, keys: list[str]) -> dict[str, np.ndarray]:
        import pyarrow.compute as pc

        return {k: pc.fill_null(result[k].cast("float64"), np.nan).to_numpy() for k in keys}


class PanelfxSingleThreadEngine(PanelfxEngine):
    """The same ``derive`` call on one thread (``threads=1``): what the default two threads gain."""

    name = "panelfx1"

    def run(self, frame: Any, keys: list[str]) -> Any:
        import panelfx as pfx

        makers = self._transforms()
        return pfx.derive(frame, *(makers[k]() for k in keys), id="id", time="t", threads=1)


ENGINE_CLASSES: dict[str, Callable[[], Engine]] = {
    "numpy": NumpyEngine,
    "panelfx": PanelfxEngine,
    "panelfx1": PanelfxSingleThreadEngine,
    "pandas": PandasEngine,
    "polars": PolarsEngine,
    "duckdb": DuckdbEngine,
}


# ----------------------------------------------------------------------------- checks
def disagreements(got: dict[str, np.ndarray], ref: dict[str, np.ndarray], rtol: float = 1e-9) -> list[str]:
    """Where ``got`` differs from ``ref``: missing in the same rows, values within
    ``rtol`` relative (of the larger of |ref| and 1).  Empty when they agree."""
    bad = []
    for k in ref:
        a, b = np.asarray(got[k], dtype="float64"), np.asarray(ref[k], dtype="float64")
        if a.shape != b.shape:
            bad.append(f"{k}: {a.shape} rows, expected {b.shape}")
            continue
        na, nb = np.isnan(a), np.isnan(b)
        if (na != nb).any():
            i = int(np.flatnonzero(na != nb)[0])
            bad.append(f"{k}: missing in {int((na != nb).sum())} other rows (first row {i}: got {a[i]}, expected {b[i]})")
            continue
        err = np.abs(a[~nb] - b[~nb]) / np.maximum(np.abs(b[~nb]), 1.0)
        if err.size and err.max() > rtol:
            i = int(np.flatnonzero(~nb)[np.argmax(err)])
            bad.append(f"{k}: relative difference {err.max():.2e} (row {i}: got {a[i]!r}, expected {b[i]!r})")
    return bad


def agreement(n: int = 300, seed: int = 7, engines: tuple[str, ...] = ENGINES) -> dict[str, list[str]]:
    """Run every installed engine on a small panel (shuffled) and compare with the numpy
    floor on the transforms panelfx has; returns engine -> disagreements."""
    data = make_panel(n, seed)
    keys = PanelfxEngine().available()
    ref_engine = NumpyEngine()
    ref = ref_engine.extract(ref_engine.run(ref_engine.prepare(data), keys), keys)
    report = {}
    for name in engines:
        if name == "numpy":
            continue
        eng = ENGINE_CLASSES[name]()
        if not _installed(name):
            continue
        report[name] = disagreements(eng.extract(eng.run(eng.prepare(data), keys), keys), ref)
    return report


def per_subject_sums(data: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Running dose sum and trapezoid area added up subject by subject, occasion by
    occasion, in extended precision (np.longdouble): the accuracy reference.  Loops over
    occasion numbers (about 40), not over subjects or rows."""
    n = len(data["id"])
    order = np.lexsort((data["t"], data["id"]))
    ids, t = data["id"][order], data["t"][order].astype(np.longdouble)
    d = data["dose"][order].astype(np.longdouble)
    start = np.ones(n, dtype=bool)
    start[1:] = ids[1:] != ids[:-1]
    starts = np.flatnonzero(start)
    pos = np.arange(n) - starts[np.cumsum(start) - 1]
    step = np.zeros(n, dtype=np.longdouble)
    step[1:] = (t[1:] - t[:-1]) * (d[1:] + d[:-1]) / 2
    step[start] = 0
    total, area = d.copy(), step.copy()
    by_pos = np.argsort(pos, kind="stable")
    edges = np.searchsorted(pos[by_pos], np.arange(1, int(pos.max()) + 1))
    for rows in np.split(by_pos, edges)[1:]:
        total[rows] += total[rows - 1]
        area[rows] += area[rows - 1]
    out = {}
    for k, v in (("cumulative_sum", total), ("cumulative_area", area)):
        back = np.empty(n, dtype=np.float64)
        back[order] = v.astype(np.float64)
        out[k] = back
    return out


def relative_error(got: np.ndarray, ref: np.ndarray) -> float:
    """Largest |got - ref| / |ref| (an exact zero must come out exactly zero)."""
    zero = ref == 0
    if (got[zero] != 0).any():
        return float("inf")
    return float(np.max(np.abs(got[~zero] - ref[~zero]) / np.abs(ref[~zero]), initial=0.0))


def _installed(name: str) -> bool:
    import importlib.util

    return name not in ("polars", "duckdb") or importlib.util.find_spec(name) is not None


# ----------------------------------------------------------------------------- worker
def _mem() -> tuple[int, int]:
    """(current, peak) resident set size in bytes (Linux)."""
    with open("/proc/self/status") as f:
        s = f.read()
    rss = int(re.search(r"VmRSS:\s+(\d+)", s).group(1)) * 1024
    hwm = int(re.search(r"VmHWM:\s+(\d+)", s).group(1)) * 1024
    return rss, hwm


def _reset_peak() -> bool:
    """Reset the peak resident size to the current one (Linux >= 4.0)."""
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return True
    except OSError:
        return False


def _measure(fn: Callable[[], Any]) -> tuple[float, int, Any]:
    """(seconds, extra peak bytes, result) of one call."""
    gc.collect()
    _reset_peak()
    rss0, _ = _mem()
    t0 = time.perf_counter()
    res = fn()
    sec = time.perf_counter() - t0
    _, hwm = _mem()
    return sec, max(hwm - rss0, 0), res


def _load(folder: str) -> dict[str, np.ndarray]:
    return {c: np.load(os.path.join(folder, f"{c}.npy")) for c in ("id", "t", "y", "dose", "event")}


def worker(args: argparse.Namespace) -> dict[str, Any]:
    eng = ENGINE_CLASSES[args.engine]()
    keys = args.keys.split(",")
    frame = eng.prepare(_load(args.data))
    if args.mode == "cold":
        target = keys if args.target == "job" else [args.target]
        sec, peak, res = _measure(lambda: eng.run(frame, target))
        out: dict[str, Any] = {"seconds": sec, "peak": peak}
        if args.check:
            got = eng.extract(res, target)
            del res
            if args.engine == "numpy" and args.write_ref:
                for k, v in got.items():
                    np.save(os.path.join(args.data, f"ref_{k}.npy"), v)
                out["bad"] = []
            else:
                ref = {k: np.load(os.path.join(args.data, f"ref_{k}.npy"), mmap_mode="r") for k in target}
                out["bad"] = disagreements(got, ref)
            if args.engine == "panelfx" and args.accuracy:
                exact = per_subject_sums(_load(args.data))
                out["accuracy"] = {k: relative_error(got[k], exact[k]) for k in exact if k in got}
        return out
    # warm: best of several runs, whole job first, then each transform
    out = {}
    for target in ["job", *keys]:
        tk = keys if target == "job" else [target]
        times: list[float] = []
        spent = 0.0
        while len(times) < args.repeat and (len(times) < args.min_repeat or spent < args.budget):
            gc.collect()
            t0 = time.perf_counter()
            res = eng.run(frame, tk)
            times.append(time.perf_counter() - t0)
            del res
            spent += times[-1]
        out[target] = {"best": min(times), "runs": len(times)}
    return out


#: glibc allocator settings for --reuse-freed-memory: no fresh mmap per large array (each one costs the
#: kernel a page fault per page and a zeroing pass; with transparent huge pages also compaction) and
#: freed memory kept for the next array instead of returned to the system.  Every engine gets them.
REUSE_FREED_MEMORY = {"MALLOC_MMAP_MAX_": "0", "MALLOC_TRIM_THRESHOLD_": str(2**40)}


def _spawn(args: argparse.Namespace, **kw: Any) -> dict[str, Any]:
    cmd = [sys.executable, os.path.abspath(__file__), "--worker"]
    for k, v in kw.items():
        if v is True:
            cmd.append(f"--{k.replace('_', '-')}")
        elif v is not False and v is not None:
            cmd += [f"--{k.replace('_', '-')}", str(v)]
    cmd += ["--repeat", str(args.repeat), "--min-repeat", str(args.min_repeat), "--budget", str(args.budget)]
    env = {**os.environ, **REUSE_FREED_MEMORY} if args.reuse_freed_memory else None
    proc = subprocess.run(cmd, capture_output=True, text=True, env=env)
    if proc.returncode != 0:
        raise RuntimeError(f"worker {kw} failed:\n{proc.stderr[-3000:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


# ----------------------------------------------------------------------------- report
def _fmt_s(x: float | None) -> str:
    return "n/a" if x is None else (f"{x:.3f}" if x < 10 else f"{x:.1f}")


def _fmt_r(x: float | None) -> str:
    return "n/a" if x is None else f"{x:.2f}"


def _mib(b: float | None) -> str:
    return "n/a" if b is None else f"{b / 2**20:.0f}"


def machine() -> dict[str, Any]:
    import pandas as pd

    mem = 0
    try:
        with open("/proc/meminfo") as f:
            mem = int(re.search(r"MemTotal:\s+(\d+)", f.read()).group(1)) * 1024
    except OSError:
        pass
    cpu = platform.processor()
    try:
        with open("/proc/cpuinfo") as f:
            cpu = re.search(r"model name\s*:\s*(.+)", f.read()).group(1).strip()
    except (OSError, AttributeError):
        pass
    versions = {"python": platform.python_version(), "numpy": np.__version__, "pandas": pd.__version__}
    for mod in ("panelfx", "polars", "duckdb", "pyarrow"):
        try:
            versions[mod] = __import__(mod).__version__
        except ImportError:
            pass
    return {"cpu": cpu, "cores": os.cpu_count(), "memory_gib": round(mem / 2**30, 1), "versions": versions,
            "load": os.getloadavg()}


def report(results: dict[str, Any], keys: list[str], engines: list[str], rows: int) -> str:
    lines = []
    outb = output_bytes(rows, keys)
    for variant, res in results.items():
        lines.append(f"\n## {variant} rows ({rows:,} rows; derived outputs {outb / 2**20:.0f} MiB)\n")
        px_best = res.get("panelfx", {}).get("warm", {}).get("job", {}).get("best")
        lines.append("| engine | whole job, best s | cold s | ratio to panelfx | extra peak MiB | peak / outputs |")
        lines.append("|---|---:|---:|---:|---:|---:|")
        for e in engines:
            r = res.get(e)
            if not r:
                continue
            best = r["warm"]["job"]["best"]
            lines.append(f"| {e} | {_fmt_s(best)} | {_fmt_s(r['cold']['job']['seconds'])} | "
                         f"{_fmt_r(best / px_best if px_best else None)} | {_mib(r['cold']['job']['peak'])} | "
                         f"{r['cold']['job']['peak'] / outb:.2f} |")
        lines.append("")
        head = "| transform | " + " | ".join(f"{e} s" for e in engines if e in res)
        head += " | " + " | ".join(f"{e} / panelfx" for e in engines if e in res and e != "panelfx")
        head += " | panelfx cold s | panelfx peak MiB |"
        lines.append(head)
        lines.append("|---" * (head.count("|") - 1) + "|")
        for k in keys:
            row = [k]
            pxk = res.get("panelfx", {}).get("warm", {}).get(k, {}).get("best")
            for e in engines:
                if e in res:
                    row.append(_fmt_s(res[e]["warm"].get(k, {}).get("best")))
            for e in engines:
                if e in res and e != "panelfx":
                    b = res[e]["warm"].get(k, {}).get("best")
                    row.append(_fmt_r(b / pxk if (b and pxk) else None))
            c = res.get("panelfx", {}).get("cold", {}).get(k)
            row.append(_fmt_s(c["seconds"]) if c else "n/a")
            row.append(_mib(c["peak"]) if c else "n/a")
            lines.append("| " + " | ".join(row) + " |")
    if len(results) == 2 and all("panelfx" in r for r in results.values()):
        a, b = (results[v]["panelfx"]["warm"]["job"]["best"] for v in ("shuffled", "sorted"))
        lines.append(f"\npanelfx: shuffled / pre-sorted = {a / b:.2f}")
    return "\n".join(lines)


def targets(results: dict[str, Any], keys: list[str], rows: int) -> str:
    """The issue's targets, as measured in this run (ratios, so that run-to-run drift cancels)."""
    lines = ["\n## targets (this run)\n"]

    def line(ok: bool, text: str) -> None:
        lines.append(f"- [{'x' if ok else ' '}] {text}")

    res = results.get("shuffled", {})
    if "panelfx" in res and "numpy" in res:
        w = {e: r["warm"] for e, r in res.items()}
        px_job = w["panelfx"]["job"]["best"]
        r = px_job / w["numpy"]["job"]["best"]
        line(r <= 1.0, f"whole job (default threads) at most 1.0x the single-thread numpy floor: {r:.2f}x")
        if "panelfx1" in w:
            r1 = w["panelfx1"]["job"]["best"] / w["numpy"]["job"]["best"]
            lines.append(f"  (one thread: {r1:.2f}x the floor; two threads gain {r1 / r:.2f}x)")
        if "pandas" in w:
            r = w["pandas"]["job"]["best"] / px_job
            line(r >= 15, f"whole job at least 15x faster than idiomatic pandas: {r:.1f}x")
        worst = max(keys, key=lambda k: w["panelfx"][k]["best"] / w["numpy"][k]["best"])
        r = w["panelfx"][worst]["best"] / w["numpy"][worst]["best"]
        line(r <= 2, f"every transform within 2x of its floor kernel: worst {worst} {r:.2f}x")
        if "pandas" in w:
            slow = [k for k in keys if w["panelfx"][k]["best"] > w["pandas"][k]["best"]]
            line(not slow, "no transform slower than its pandas version" + (f": {slow}" if slow else ""))
        peak = res["panelfx"]["cold"]["job"]["peak"] / output_bytes(rows, keys)
        line(peak <= 3, f"extra peak memory at most 3x the derived outputs: {peak:.2f}x")
        acc = res["panelfx"]["cold"]["job"].get("accuracy")
        if acc:
            worst_acc = max(acc.values())
            line(worst_acc <= 1e-12, f"running sums and areas within 1e-12 relative of per-subject sums: {worst_acc:.1e}")
    if "sorted" in results and "panelfx" in results.get("sorted", {}) and "panelfx" in res:
        r = res["panelfx"]["warm"]["job"]["best"] / results["sorted"]["panelfx"]["warm"]["job"]["best"]
        line(r >= 2, f"pre-sorted input at least 2x faster than shuffled: {r:.2f}x")
        if "numpy" in results["sorted"]:
            s = results["sorted"]["panelfx"]["warm"]["job"]["best"] / results["sorted"]["numpy"]["warm"]["job"]["best"]
            line(s <= 1.2, f"pre-sorted whole job at most 1.2x the (pre-sorted) numpy floor: {s:.2f}x")
        if "numpy" in res and "numpy" in results["sorted"]:
            f = res["numpy"]["warm"]["job"]["best"] / results["sorted"]["numpy"]["warm"]["job"]["best"]
            lines.append(f"  (the numpy floor: {f:.2f}x)")
    return "\n".join(lines)


def growth(path: str, results: dict[str, Any], rows: int) -> str:
    """Whole-job growth from a smaller run (its --json file) to this one, against n log n."""
    with open(path) as f:
        small = json.load(f)
    factor = rows / small["rows"]
    predicted = factor * math.log(rows) / math.log(small["rows"])
    lines = [f"\n## growth from {small['rows']:,} to {rows:,} rows (n log n predicts {predicted:.1f}x)\n",
             "| variant | engine | small s | this s | growth | extra peak / outputs |", "|---|---|---:|---:|---:|---:|"]
    for variant, res in results.items():
        for e, r in res.items():
            before = small["results"].get(variant, {}).get(e)
            if before is None:
                continue
            a, b = before["warm"]["job"]["best"], r["warm"]["job"]["best"]
            peak = r["cold"]["job"]["peak"] / output_bytes(rows, small["keys"])
            lines.append(f"| {variant} | {e} | {a:.3f} | {b:.3f} | {b / a:.1f}x | {peak:.2f} |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", type=int, default=200_000, help="subjects (default 200,000: about 2M rows)")
    ap.add_argument("--seed", type=int, default=2024)
    ap.add_argument("--engines", default=",".join(ENGINES), help="comma-separated, from " + ", ".join(ENGINES))
    ap.add_argument("--variants", default="shuffled,sorted", help="shuffled and/or sorted (pre-sorted rows)")
    ap.add_argument("--repeat", type=int, default=5, help="warm runs per measurement, at most (best is kept)")
    ap.add_argument("--min-repeat", type=int, default=3, help="warm runs per measurement, at least")
    ap.add_argument("--budget", type=float, default=20.0, help="seconds per measurement after --min-repeat runs")
    ap.add_argument("--no-cold-transforms", action="store_true", help="skip the cold run of each single transform")
    ap.add_argument("--json", help="also write the raw results to this file")
    ap.add_argument("--growth", help="a --json file of a smaller run: print how each engine's whole job grew")
    ap.add_argument("--reuse-freed-memory", action="store_true",
                    help="run every engine with glibc's allocator keeping freed memory (MALLOC_MMAP_MAX_=0, "
                         "MALLOC_TRIM_THRESHOLD_=2**40): shows how much of a large job is the kernel mapping fresh pages")
    # worker-only options
    ap.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--engine", help=argparse.SUPPRESS)
    ap.add_argument("--data", help=argparse.SUPPRESS)
    ap.add_argument("--mode", help=argparse.SUPPRESS)
    ap.add_argument("--target", help=argparse.SUPPRESS)
    ap.add_argument("--keys", help=argparse.SUPPRESS)
    ap.add_argument("--check", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--write-ref", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--accuracy", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.worker:
        print(json.dumps(worker(args)))
        return 0

    engines = [e for e in args.engines.split(",") if e]
    for e in engines:
        if e not in ENGINE_CLASSES:
            ap.error(f"unknown engine {e!r}")
        if not _installed(e):
            ap.error(f"engine {e!r} is not installed: pip install -e '.[bench]'")
    if "numpy" not in engines:
        engines.insert(0, "numpy")  # the reference for the agreement check
    engines = ["numpy", *[e for e in engines if e != "numpy"]]
    keys = PanelfxEngine().available()
    if len(keys) < len(JOB):
        print(f"note: panelfx has no transform yet for {[k for k in JOB if k not in keys]}; the job is {keys}")
    info = machine()
    print(f"machine: {info['cpu']}, {info['cores']} cores, {info['memory_gib']} GiB; load {info['load']}")
    print("versions: " + ", ".join(f"{k} {v}" for k, v in info["versions"].items()))
    if args.reuse_freed_memory:
        print("allocator: " + " ".join(f"{k}={v}" for k, v in REUSE_FREED_MEMORY.items()) + " (every engine)")
    results: dict[str, Any] = {}
    rows = 0
    with tempfile.TemporaryDirectory(prefix="panelfx-bench-") as folder:
        for variant in args.variants.split(","):
            data = make_panel(args.n, args.seed, shuffled=variant == "shuffled")
            rows = len(data["id"])
            for c, v in data.items():
                np.save(os.path.join(folder, f"{c}.npy"), v)
            del data
            print(f"\n{variant}: {args.n:,} subjects, {rows:,} rows")
            res: dict[str, Any] = {}
            common = dict(data=folder, keys=",".join(keys))
            # 1. cold whole job in a fresh process, outputs checked against the floor
            for e in engines:
                r = _spawn(args, worker=True, engine=e, mode="cold", target="job", check=True,
                           write_ref=e == "numpy", accuracy=e == "panelfx", **common)
                if r["bad"]:
                    raise SystemExit(f"{e} disagrees with the numpy floor:\n  " + "\n  ".join(r["bad"]))
                res[e] = {"cold": {"job": r}}
                print(f"  {e:8s} agrees; cold job {r['seconds']:.3f} s, extra peak {r['peak'] / 2**20:.0f} MiB",
                      flush=True)
                if "accuracy" in r:
                    print("           largest relative error against per-subject sums in extended precision: "
                          + ", ".join(f"{k} {v:.1e}" for k, v in r["accuracy"].items()), flush=True)
            # 2. cold single transforms, each in a fresh process
            if not args.no_cold_transforms:
                for e in engines:
                    for k in keys:
                        res[e]["cold"][k] = _spawn(args, worker=True, engine=e, mode="cold", target=k, **common)
            # 3. warm: best of several
            for e in engines:
                res[e]["warm"] = _spawn(args, worker=True, engine=e, mode="warm", **common)
                print(f"  {e:8s} warm job {res[e]['warm']['job']['best']:.3f} s", flush=True)
            results[variant] = res
    order = ["panelfx", *[e for e in engines if e != "panelfx"]]
    print(report(results, keys, order, rows))
    print(targets(results, keys, rows))
    if args.growth:
        print(growth(args.growth, results, rows))
    if args.json:
        with open(args.json, "w") as f:
            json.dump({"machine": info, "n": args.n, "rows": rows, "keys": keys, "results": results}, f, indent=1)
    return 0


if __name__ == "__main__":
    sys.exit(main())
