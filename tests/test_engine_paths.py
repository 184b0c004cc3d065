"""Every ordering strategy, search path and "probe the first rows" shortcut of the engine, forced.

Each path must give exactly what its definition gives: the ordering equals ``np.lexsort`` on
(time, first-appearance subject code) (numpy is the outside reference), and every search path
gives bit-identical derived values.
"""

from __future__ import annotations

import contextlib

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx import _kernels as K
from panelfx import _order, _time
from panelfx._panel import Panel
from panelfx._subjects import Subjects

ORDERINGS = ["identity", "by_value", "packed", "ranked", "lexsort"]
SEARCHES = [(), ("rank",), ("packed",), ("merge",), ("searchsorted",), ("rank", "searchsorted"), ("rank", "merge")]


@contextlib.contextmanager
def search(paths: tuple[str, ...]):
    token = K.FORCED_SEARCH.set(paths)
    try:
        yield
    finally:
        K.FORCED_SEARCH.reset(token)


def random_frame(rng: np.random.Generator, trial: int) -> pd.DataFrame:
    n = int(rng.integers(2, 200))
    ids = rng.integers(-5, int(rng.integers(1, 30)), n) * int(rng.choice([1, 7, 10**12]))
    kind = trial % 5
    t = [rng.integers(0, 30, n), np.round(rng.normal(size=n), 2 if trial % 2 else 9),
         pd.to_datetime(rng.integers(0, 50, n) * 86_400 * 10**9), rng.integers(0, 1000, n) * 1.0,
         rng.normal(size=n) / 3][kind]
    df = pd.DataFrame({"id": ids if trial % 7 else ids.astype(str), "t": t, "y": rng.normal(size=n)})
    if trial % 3 == 0:
        df = df.sort_values(["id", "t"])
    if trial % 5 == 0:  # grouped by subject, in time order, subjects not in id order
        blocks = [g for _, g in df.sort_values(["id", "t"]).groupby("id")]
        df = pd.concat([blocks[i] for i in rng.permutation(len(blocks))])
    return df


@pytest.mark.parametrize("strategy", [None, *ORDERINGS])
def test_every_ordering_strategy_gives_the_lexsort_order(strategy):
    rng = np.random.default_rng(11)
    used = set()
    for trial in range(120):
        df = random_frame(rng, trial)
        with contextlib.ExitStack() as stack:
            if strategy:
                stack.enter_context(_order.forced(strategy))
            p = Panel(df, id="id", time="t", strict=False)
        used.add(p.ordering.strategy)
        codes = pd.factorize(df["id"], sort=False)[0]
        tt = df["t"].to_numpy()
        want = np.lexsort((tt, codes))
        got = p.ordering.order if p.ordering.order is not None else np.arange(len(df))
        assert np.array_equal(got, want), (trial, p.ordering.strategy)
        sc = codes[got]
        assert np.array_equal(p.starts, np.flatnonzero(np.r_[True, sc[1:] != sc[:-1]]))
    if strategy is not None:
        assert strategy in used  # the forced path really ran


def test_strategies_chosen_without_forcing():
    """Which path the engine picks by itself: identity on sorted input, by_value for integer ids,
    packed for others, ranked when raw times need too many bits, lexsort when even ranks do not fit."""
    sorted_df = pd.DataFrame({"id": [1, 1, 2], "t": [0, 1, 0]})
    assert Panel(sorted_df, id="id", time="t").ordering.strategy == "identity"
    assert Panel(sorted_df.iloc[::-1], id="id", time="t").ordering.strategy == "by_value"
    assert Panel(sorted_df.iloc[::-1].astype({"id": str}), id="id", time="t").ordering.strategy == "packed"
    wide = pd.DataFrame({"id": ["a", "b", "a"], "t": np.array([2**62, 0, 0], dtype=np.int64)})
    assert Panel(wide, id="id", time="t").ordering.strategy == "ranked"
    # codes, ranks and row numbers that cannot share 63 bits: exercised through the bit budget
    codes = np.array([2**40, 0, 2**40], dtype=np.int64)
    order, _ = _order._sort(codes, np.array([2**30, 5, 0], dtype=np.int64), None)
    assert order.strategy == "ranked"
    order, sorted_codes = _order._sort(np.array([2**61, 0, 2**61], dtype=np.int64),
                                       np.array([1, 0, 0], dtype=np.int64), None)
    assert order.strategy == "lexsort" and order.order.tolist() == [1, 2, 0]
    assert sorted_codes.tolist() == [0, 2**61, 2**61]


def test_integer_ids_too_spread_to_pack_are_factorised():
    df = pd.DataFrame({"id": np.array([2**62, -(2**62), 2**62], dtype=np.int64), "t": [1, 0, 0]})
    p = Panel(df, id="id", time="t")
    assert p.ordering.strategy == "packed"
    assert p.ordering.order.tolist() == [2, 0, 1]


def test_small_integer_id_types_do_not_wrap():
    """int8 ids from -100 to 100: the offset from the smallest id does not fit int8."""
    df = pd.DataFrame({"id": np.array([100, -100, 100, -100], dtype=np.int8), "t": [1, 1, 0, 0],
                       "y": [1.0, 2.0, 3.0, 4.0]})
    out = pfx.derive(df, pfx.lag("y"), id="id", time="t")
    assert out["y_lag1"].tolist()[:2] == [3.0, 4.0]


@pytest.mark.parametrize("paths", SEARCHES)
def test_every_search_path_gives_the_same_values(paths):
    rng = np.random.default_rng(12)
    steps = [pfx.lag("y", offset=0.5), pfx.lag("y", offset=1, tolerance=0.25, name="lag_tol"),
             pfx.rolling("y", "sum", span=1.5), pfx.rolling("y", "max", span=0.75, closed="both"),
             pfx.carry_forward("y", max_span=1)]
    for trial in range(30):
        n = int(rng.integers(1, 300))
        t = np.round(rng.random(n) * 10, [0, 1, 2][trial % 3]) if trial % 4 else rng.random(n) * 10
        df = pd.DataFrame({"id": rng.integers(0, 8, n), "t": t, "y": rng.normal(size=n)})
        df = df.drop_duplicates(["id", "t"])
        df.loc[df.sample(frac=0.2, random_state=trial).index, "y"] = np.nan
        want = pfx.derive(df, *steps, id="id", time="t")
        with search(paths):
            got = pfx.derive(df, *steps, id="id", time="t")
        pd.testing.assert_frame_equal(got, want, check_exact=True)


def test_search_paths_are_really_taken():
    s = Subjects.from_codes(np.array([0, 0, 1]))
    tkey = np.array([5, 9, 2], dtype=np.int64)
    assert K.search_key(s, tkey).mode == "offset"
    with search(("rank",)):
        assert K.search_key(s, tkey).mode == "rank"
    wide = np.array([0, 2**62, 5], dtype=np.int64)  # offsets need 63 bits: ranks instead
    sk = K.search_key(s, wide)
    assert sk.mode == "rank"
    q = np.array([1, 2**62, 6], dtype=np.int64)
    assert K.first_at_or_after(s, wide, sk, q).tolist() == [1, 1, 3]  # hand computed


def test_unsorted_queries_are_answered_in_place():
    key = np.array([1, 3, 3, 7], dtype=np.int64)
    q = np.array([7, 0, 3, 8, 2], dtype=np.int64)
    want = np.searchsorted(key, q, side="left")  # numpy as the reference
    for paths in [(), ("packed",), ("merge",), ("searchsorted",)]:
        with search(paths):
            assert K._lookup(key, q).tolist() == want.tolist()


@pytest.mark.parametrize("paths", [(), ("packed",), ("merge",), ("searchsorted",)])
def test_sorted_queries_every_lookup(paths):
    """Sorted queries with repeats, equal to keys, below and above them all, and near 2**62 (past
    the packing: merged by argsort instead)."""
    rng = np.random.default_rng(11)
    key = np.sort(rng.integers(0, 50, 300))
    q = np.sort(np.concatenate([rng.integers(-3, 55, 200), key[:20], [0, 0, 49, 60]]))
    big = np.array([2**62 - 5, 2**62 + 3, 2**62 + 3], dtype=np.int64)
    with search(paths):
        for k, qq in [(key, q), (key, np.maximum(q, 0)), (np.append(key, big), np.append(q, big[::-1][:2])),
                      (key[:0], np.maximum(q, 0)), (key, q[:0])]:
            qq = np.sort(qq)
            assert K._lookup(k, qq).tolist() == np.searchsorted(k, qq, side="left").tolist()  # numpy as reference


# ---------------------------------------------------------------------- probe shortcuts
def test_decimal_probe_of_the_first_rows_is_confirmed_on_all_rows():
    """The first 4,096 times are whole numbers, later ones have two decimals: the scale must come
    from every row, not the probe."""
    n = _time.PROBE + 50
    t = np.arange(n, dtype=np.float64)
    t[-50:] = np.arange(50) * 0.01 + n + 0.5
    assert _time.decimal_scale(t) == 100
    assert _time.decimal_scale(t[: _time.PROBE]) == 1
    df = pd.DataFrame({"id": 1, "t": t, "y": 1.0})
    out = pfx.derive(df, pfx.rolling("y", "count", span=0.02), id="id", time="t")
    # (t - 0.02, t] holds the row before (0.01 earlier) and itself, exactly as decimals
    assert out["y_count_0p02"].iloc[-1] == 2 and out["y_count_0p02"].iloc[-49] == 2


def test_decimal_probe_rejects_binary_floats_after_the_first_rows():
    t = np.arange(_time.PROBE + 3, dtype=np.float64) / 10
    t[-1] = t[-2] + 1 / 3
    assert _time.decimal_scale(t) is None
    axis, _ = _time.TimeAxis.read(pd.Series(t, name="t"))
    assert axis.binary


def test_decimal_scale_needs_room_in_int64():
    assert _time.decimal_scale(np.array([0.5, 1e18])) is None  # 1e18 * 10 would pass 2**62
    assert _time.decimal_scale(np.array([1.0, 1e18])) == 1


def test_integer_ids_whose_packed_key_does_not_fit_fall_back_to_codes():
    """ids spread over 2**40 and times over 2**30 leave no room for the row number beside them:
    the by-value path gives way to factorised codes, with the same order (numpy lexsort as reference)."""
    df = pd.DataFrame({"id": np.array([2**40, 0, 2**40, 0], dtype=np.int64),
                       "t": np.array([2**30, 5, 0, 2**30], dtype=np.int64)})
    with _order.forced("by_value"):
        p = Panel(df, id="id", time="t")
    assert p.ordering.strategy == "packed"
    codes = pd.factorize(df["id"])[0]
    assert p.ordering.order.tolist() == np.lexsort((df["t"].to_numpy(), codes)).tolist()


def test_unsigned_ids_beyond_int64():
    big = np.uint64(2**63 + 5)
    df = pd.DataFrame({"id": np.array([big, 3, big], dtype=np.uint64), "t": [1, 0, 0], "y": [1.0, 2.0, 3.0]})
    out = pfx.derive(df, pfx.lag("y"), id="id", time="t")
    assert out["y_lag1"].tolist()[0] == 3.0 and np.isnan(out["y_lag1"].tolist()[2])


# ---------------------------------------------------------------------- short windows in row blocks
def newest_first_sum(y: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Plain loop: 0.0, then the window's values from its last row back to its first (the order
    the direct kernel adds them in), non-missing values only."""
    out = np.zeros(len(lo))
    for i in range(len(lo)):
        total = 0.0
        for j in range(hi[i] - 1, lo[i] - 1, -1):
            if not np.isnan(y[j]):
                total += float(y[j])
        out[i] = total
    return out


@pytest.mark.parametrize("block", [1, 2, 3, 5, 64, 1 << 15])
def test_direct_windows_in_any_block_of_rows(block, monkeypatch):
    """Short windows are reduced in blocks of rows (windows reach back across block edges):
    the same bits for every block size, and the same as a plain loop."""
    from panelfx import _windows as W

    rng = np.random.default_rng(13)
    n = 400
    df = pd.DataFrame({"id": np.repeat(np.arange(40), 10), "t": np.tile(np.arange(10) * 3, 40),
                       "y": rng.normal(size=n) * 10.0 ** rng.integers(-9, 9, n)})
    df.loc[rng.random(n) < 0.2, "y"] = np.nan
    steps = [pfx.rolling("y", "sum", occasions=4, name="s4"),
             pfx.rolling("y", "sum", occasions=3, exclude_current=True, name="s3x"),
             pfx.rolling("y", "sum", span=20, name="s20"),  # up to 7 rows: short ones direct, longer by prefix
             pfx.rolling("y", "max", occasions=3, name="m3"), pfx.rolling("y", "count", occasions=2, name="c2")]
    monkeypatch.setattr(W, "_BLOCK", 1 << 15)
    want = pfx.derive(df, *steps, id="id", time="t")
    monkeypatch.setattr(W, "_BLOCK", block)
    got = pfx.derive(df, *steps, id="id", time="t")
    pd.testing.assert_frame_equal(got, want, check_exact=True)
    y = df["y"].to_numpy()
    i = np.arange(n)
    first = i - i % 10

    def same(col: str, lo: np.ndarray, hi: np.ndarray, rows: np.ndarray | None = None) -> None:
        want = newest_first_sum(y, lo, hi)
        want[newest_first_sum(~np.isnan(y) * 1.0, lo, hi) == 0] = np.nan  # no value: missing
        rows = np.ones(n, dtype=bool) if rows is None else rows
        assert np.array_equal(got[col].to_numpy()[rows], want[rows], equal_nan=True), col

    same("s4", np.maximum(first, i - 3), i + 1)
    same("s3x", np.maximum(first, i - 3), i)
    same("s20", np.maximum(first, i - 6), i + 1, rows=i - np.maximum(first, i - 6) + 1 <= 4)  # the direct ones
    assert np.array_equal(got["m3"].to_numpy(), pd.Series(y).groupby(first).rolling(3, min_periods=1).max()
                          .to_numpy(), equal_nan=True)  # pandas as the reference


# ---------------------------------------------------------------------- threads
def test_two_thread_sort_gives_the_one_thread_order(monkeypatch):
    """The packed key sorted in two halves side by side, then merged: the same permutation."""
    from panelfx import _threads

    monkeypatch.setattr(_order, "PARALLEL_SORT_MIN", 2)
    rng = np.random.default_rng(14)
    for trial in range(40):
        df = random_frame(rng, trial)
        want = Panel(df, id="id", time="t", strict=False)
        with _threads.using(2):
            got = Panel(df, id="id", time="t", strict=False)
        assert got.ordering.strategy == want.ordering.strategy
        assert (got.ordering.order is None) == (want.ordering.order is None)
        if want.ordering.order is not None:
            assert np.array_equal(got.ordering.order, want.ordering.order), trial
    key = rng.permutation(1000).astype(np.int64)
    with _threads.using(2):
        _order.sort_unique(key)
    assert key.tolist() == list(range(1000))


def test_forcing_switches_hold_on_worker_threads():
    """Transforms on worker threads see the caller's forced paths (each task runs in a copy of
    the caller's context)."""
    from panelfx import _threads

    seen = []
    with search(("rank", "searchsorted")), _threads.using(2):
        _threads.run_all([lambda: seen.append(K.FORCED_SEARCH.get()) for _ in range(4)])
    assert seen == [("rank", "searchsorted")] * 4


def test_default_threads_follow_size_and_free_cores(monkeypatch):
    """Two threads by default only for large panels with a core to spare (results do not depend on it)."""
    from panelfx import _threads

    monkeypatch.setattr(_threads.os, "sched_getaffinity", lambda pid: {0, 1}, raising=False)
    monkeypatch.setattr(_threads.os, "getloadavg", lambda: (0.3, 0.3, 0.3))
    assert _threads.default_workers(10) == 1
    assert _threads.default_workers(_threads.AUTO_MIN_ROWS) == 2
    monkeypatch.setattr(_threads.os, "getloadavg", lambda: (1.7, 1.0, 1.0))  # both cores busy
    assert _threads.default_workers(_threads.AUTO_MIN_ROWS) == 1
    monkeypatch.setattr(_threads.os, "getloadavg", lambda: (0.0, 0.0, 0.0))
    monkeypatch.setattr(_threads.os, "sched_getaffinity", lambda pid: {0}, raising=False)
    assert _threads.default_workers(_threads.AUTO_MIN_ROWS) == 1


def test_default_threads_without_a_load_average(monkeypatch):
    """Where the OS has no load average (no os.getloadavg, or it fails), the default is one thread."""
    from panelfx import _threads

    monkeypatch.setattr(_threads.os, "sched_getaffinity", lambda pid: {0, 1}, raising=False)
    monkeypatch.delattr(_threads.os, "getloadavg")
    assert _threads.default_workers(_threads.AUTO_MIN_ROWS) == 1

    def fails():
        raise OSError("no load average")

    monkeypatch.setattr(_threads.os, "getloadavg", fails, raising=False)
    assert _threads.default_workers(_threads.AUTO_MIN_ROWS) == 1
