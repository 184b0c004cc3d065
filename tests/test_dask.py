"""panelfx.dask: per-partition runs equal the single-process engine, split subjects are caught.

Small panels (the invented demo cohort: 2,000 subjects, about 23,000 rows, composite or text
ids, datetimes, rows shuffled, odd index labels) in several partitions.  Dask runs on its
synchronous scheduler, except the tests marked for an in-process ``distributed`` cluster.
"""

from __future__ import annotations

import dask
import dask.dataframe as dd
import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
import panelfx.dask as pfd
from panelfx._partition import subject_hash
from panelfx.dask._run import parse
from panelfx.demo import cohort

KEYS = {"id": ["site", "subject"], "time": "visit_date"}


def transforms() -> list[pfx.Transform]:
    return [
        pfx.baseline("sbp"),
        pfx.baseline("sbp", "last_before", reference="treat_start", name="sbp_pre"),
        pfx.change_from_baseline("sbp", "percent"),
        pfx.change_from_previous("sbp", "rate", skip_missing=True),
        pfx.lag("sbp"),
        pfx.lag("sbp", offset="30D", tolerance="10D", name="sbp_30d"),
        pfx.lag("dizzy", name="dizzy_before"),
        pfx.lag("day", name="day_before"),
        pfx.cumulative("dose_mg", "step"),
        pfx.time_since("dizzy", include_current=False),
        pfx.events_so_far("dizzy"),
        pfx.ever("dizzy"),
        pfx.carry_forward("salt_g", max_span="60D"),
        pfx.rolling("sbp", span="90D"),
        pfx.rolling("sbp", "max", occasions=3),
        pfx.within_between("salt_g"),
        pfx.occasion(),
        pfx.gap(),
        pfx.time_since_baseline(),
    ]


@pytest.fixture(scope="module")
def visits() -> pd.DataFrame:
    df = cohort(2000, seed=16)
    rng = np.random.default_rng(16)
    df.index = pd.Index(rng.permutation(len(df)) * 3 + 7, name="row")  # unique, unsorted, not 0..n
    return df


@pytest.fixture(autouse=True)
def synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


def text_ids(df: pd.DataFrame) -> pd.DataFrame:
    """One text id column instead of (site, subject)."""
    pid = df["site"].str.slice(0, 3) + "-" + df["subject"].astype(str)
    return df.drop(columns=["site", "subject"]).assign(pid=pid)


def assert_same_rows(got: pd.DataFrame, want: pd.DataFrame, columns: list[str]) -> None:
    """Row by row after aligning on the index, exactly (missing equals missing)."""
    assert got.index.is_unique and set(got.index) == set(want.index)
    got = got.loc[want.index]
    for c in columns:
        pd.testing.assert_series_equal(got[c], want[c], check_exact=True, check_dtype=True, obj=c)


# ----------------------------------------------------------------------------- equal to derive


@pytest.mark.parametrize("ids", ["composite", "text", "categorical"])
def test_shuffled_run_equals_single_process_derive(visits, ids):
    df, keys = visits, KEYS
    if ids != "composite":
        df = text_ids(visits)
        keys = {"id": "pid", "time": "visit_date"}
        if ids == "categorical":
            df = df.assign(pid=df["pid"].astype("category"))
    ddf = dd.from_pandas(df, npartitions=6)
    out = pfd.derive(ddf, *transforms(), **keys, npartitions=4)
    assert out.npartitions == 4
    got = out.compute()
    want = pfx.derive(df, *transforms(), **keys)
    assert list(got.columns) == list(want.columns)
    assert_same_rows(got, want, [c for c in want.columns if c not in df.columns])
    # the whole frame, dtypes included, equals derive on the same (Dask-read) input
    assert_same_rows(got, pfx.derive(ddf.compute(), *transforms(), **keys), list(want.columns))


def test_meta_is_predicted_without_data_and_equals_the_computed_schema(visits):
    ddf = dd.from_pandas(text_ids(visits).assign(pid=lambda d: d["pid"].astype("category")), npartitions=5)
    out = pfd.derive(ddf, *transforms(), id="pid", time="visit_date")
    predicted = out.dtypes
    got = out.compute()
    assert list(predicted.index) == list(got.columns)
    for c in got.columns:
        if isinstance(predicted[c], pd.CategoricalDtype):
            assert isinstance(got[c].dtype, pd.CategoricalDtype), c
        else:
            assert predicted[c] == got[c].dtype, c
    # a lag of an integer / boolean column is float64 / object, as in pandas when a value is missing
    assert predicted["day_before"] == np.float64 and predicted["dizzy_before"] == object


def test_a_copied_integer_column_is_float64_in_every_partition(visits):
    # The baseline of an integer column is never missing here: pandas keeps int64, while the
    # prediction (made before any data is read) says float64; every partition is cast to it, exactly.
    small = visits.loc[visits["subject"] < 15]
    ddf = dd.from_pandas(small, npartitions=3)
    out = pfd.derive(ddf, pfx.baseline("day"), **KEYS, npartitions=40)  # more partitions than subjects
    assert out.dtypes["day_baseline"] == np.float64
    parts = dask.compute(*out.to_delayed())
    assert any(len(p) == 0 for p in parts)
    assert all(p["day_baseline"].dtype == np.float64 for p in parts)
    want = pfx.derive(small, pfx.baseline("day"), **KEYS)
    assert want["day_baseline"].dtype == np.int64
    got = pd.concat(parts).loc[want.index, "day_baseline"]
    assert (got.to_numpy() == want["day_baseline"].to_numpy()).all()


def test_building_the_graph_reads_no_data_and_refuses_bad_options_at_once(visits):
    reads = []

    def load(i):
        reads.append(i)
        return visits.iloc[i::3]

    ddf = dd.from_map(load, range(3), meta=visits.iloc[:0])
    reads.clear()
    out = pfd.derive(ddf, pfx.lag("sbp"), **KEYS)  # builds the graph only
    assert reads == [] and "sbp_lag1" in out.columns
    with pytest.raises(pfx.MissingColumnError, match="nope"):
        pfd.derive(ddf, pfx.lag("nope"), **KEYS)
    with pytest.raises(pfx.ColumnExistsError):
        pfd.derive(ddf, pfx.lag("sbp", name="dose_mg"), **KEYS)
    assert reads == []


def test_datetime_and_arrow_string_inputs(visits):
    df = text_ids(visits).assign(pid=lambda d: d["pid"].astype("string[pyarrow]"),
                                 visit_date=lambda d: d["visit_date"].dt.tz_localize("Europe/Oslo"))
    df = df.drop(columns="treat_start")
    steps = [t for t in transforms() if "treat_start" not in t.inputs()]
    got = pfd.derive(dd.from_pandas(df, npartitions=4), *steps, id="pid", time="visit_date").compute()
    want = pfx.derive(df, *steps, id="pid", time="visit_date")
    assert_same_rows(got, want, list(want.columns))


def test_derive_against_pandas_groupby(visits):
    # Outside reference: pandas' own groupby shift / cumsum / cumcount on the (id, time)-sorted frame.
    ddf = dd.from_pandas(visits, npartitions=4)
    got = pfd.derive(ddf, pfx.lag("sbp"), pfx.cumulative("dose_mg"), pfx.occasion(), **KEYS).compute()
    s = visits.sort_values(["site", "subject", "visit_date"])
    g = s.groupby(["site", "subject"], sort=False)
    assert got.loc[s.index, "sbp_lag1"].equals(g["sbp"].shift(1))
    np.testing.assert_allclose(got.loc[s.index, "dose_mg_cum"], g["dose_mg"].cumsum(), rtol=1e-12)
    assert (got.loc[s.index, "occasion"].to_numpy() == g.cumcount().to_numpy() + 1).all()


def test_derivation_apply_takes_a_dask_frame_and_parses_the_json_once(visits):
    d = pfx.Derivation(*transforms(), **KEYS)
    ddf = dd.from_pandas(visits, npartitions=5)
    parse.cache_clear()
    got = d.apply(ddf, npartitions=3).compute()
    assert parse.cache_info().misses == 1 and parse.cache_info().hits >= 2  # one parse, three partitions
    want = d.apply(visits)
    assert_same_rows(got, want, list(d.outputs()))
    with pytest.raises(pfx.OptionError, match="dask"):
        d.apply(visits, npartitions=3)


# ----------------------------------------------------------------------------- partitions


def by_subject(df: pd.DataFrame, n: int) -> dd.DataFrame:
    """A dask frame whose partitions hold whole subjects (rows grouped by site), index kept."""
    sites = sorted(df["site"].unique())
    chunks = [df.loc[df["site"].isin(sites[i::n])] for i in range(n)]
    return dd.from_delayed([dask.delayed(c) for c in chunks], meta=df.iloc[:0], verify_meta=False)


def test_whole_subjects_keeps_partitions_order_and_index(visits):
    ddf = by_subject(visits, 3)
    out = pfd.derive(ddf, *transforms(), **KEYS, whole_subjects=True)
    got = out.compute()
    assert got.index.equals(ddf.compute().index)  # no shuffle: the caller's order
    want = pfx.derive(visits, *transforms(), **KEYS)
    assert_same_rows(got, want, [c for c in want.columns if c not in visits.columns])


def test_known_divisions_are_kept_without_a_shuffle(visits):
    df = visits.sort_values(["site", "subject"]).reset_index(drop=True)
    ddf = dd.from_pandas(df.assign(key=df["subject"] + 1000 * pd.factorize(df["site"])[0]).set_index("key"),
                         npartitions=4)
    out = pfd.derive(ddf, pfx.lag("sbp"), **KEYS, whole_subjects=True)
    assert out.known_divisions and out.divisions == ddf.divisions


def split_frame(visits: pd.DataFrame) -> dd.DataFrame:
    """Three partitions of whole sites, except that two rows of subject (Brookfield, 25) sit in another one."""
    one = (visits["site"] == "Brookfield") & (visits["subject"] == 25)
    moved = visits.loc[one].iloc[:2]
    rest = visits.drop(moved.index)
    sites = sorted(visits["site"].unique())  # Brookfield is sites[1]: partition 1
    parts = [rest.loc[rest["site"].isin(sites[i::3])] for i in range(3)]
    parts[2] = pd.concat([parts[2], moved])
    return dd.from_delayed([dask.delayed(p) for p in parts], meta=visits.iloc[:0], verify_meta=False)


def test_a_split_subject_raises_a_typed_error_naming_it(visits):
    ddf = split_frame(visits)
    # Outside reference: pandas' groupby finds the subjects whose rows sit in several partitions.
    parts = pd.concat([p.assign(_p=i) for i, p in enumerate(dask.compute(*ddf.to_delayed()))])
    spread = parts.groupby(["site", "subject"])["_p"].nunique()
    assert list(spread[spread > 1].index) == [("Brookfield", 25)]
    out = pfd.derive(ddf, pfx.lag("sbp"), **KEYS, whole_subjects=True)  # lazy: nothing raised yet
    with pytest.raises(pfx.SplitSubjectError, match="Brookfield") as info:
        out.compute()
    assert isinstance(info.value, ValueError)
    assert info.value.ids == [("Brookfield", 25)] and info.value.count == 1
    assert len(info.value.partitions) == 2


def test_a_split_subject_is_reshuffled_when_asked(visits):
    ddf = split_frame(visits)
    got = pfd.derive(ddf, *transforms(), **KEYS, whole_subjects=True, if_split="shuffle").compute()
    want = pfx.derive(visits, *transforms(), **KEYS)
    assert_same_rows(got, want, [c for c in want.columns if c not in visits.columns])


def test_row_order_input_restores_partitions_order_and_divisions(visits):
    ddf = dd.from_pandas(visits, npartitions=5)
    out = pfd.derive(ddf, pfx.lag("sbp"), pfx.gap(), **KEYS, row_order="input")
    assert out.npartitions == 5 and out.divisions == ddf.divisions
    assert "__panelfx_row" not in out.columns
    got_parts = dask.compute(*out.to_delayed())
    for got, src in zip(got_parts, dask.compute(*ddf.to_delayed())):
        assert got.index.equals(src.index)  # same rows in each partition, same order
    want = pfx.derive(visits, pfx.lag("sbp"), pfx.gap(), **KEYS)
    assert_same_rows(pd.concat(got_parts), want, ["sbp_lag1", "gap"])


def test_row_order_input_with_unknown_divisions_and_a_named_index(visits):
    ddf = dd.from_pandas(visits, npartitions=3, sort=False)
    got = pfd.derive(ddf, pfx.lag("sbp"), **KEYS, row_order="input").compute()
    assert got.index.equals(visits.index) and got.index.name == "row"


# ----------------------------------------------------------------------------- side tables


def placement(frame: pd.DataFrame, id, tables):
    """Which subjects a partition holds, in the frame and in the side table."""
    def keys(d):
        return sorted(set(zip(d["site"], d["subject"])))
    return pd.DataFrame({"main": [keys(frame)], "side": [keys(tables["labs"])], "rows": [len(tables["labs"])]})


def labs(visits: pd.DataFrame) -> pd.DataFrame:
    """An invented side table: a few lab records per subject, ids read as another integer dtype."""
    rng = np.random.default_rng(3)
    s = visits.drop_duplicates(["site", "subject"])[["site", "subject"]]
    s = s.loc[s.index.repeat(rng.integers(0, 4, len(s)))].reset_index(drop=True)
    extra = pd.DataFrame({"site": ["Nowhere"] * 3, "subject": [1, 2, 3]})  # subjects the frame lacks
    out = pd.concat([s, extra], ignore_index=True)
    return out.assign(subject=out["subject"].astype("Int32"), alt=rng.normal(30, 5, len(out)))


META = pd.DataFrame({"main": pd.Series(dtype=object), "side": pd.Series(dtype=object),
                     "rows": pd.Series(dtype="int64")})


@pytest.mark.parametrize("whole", [False, True])
def test_side_tables_are_co_partitioned(visits, whole):
    side = labs(visits)
    ddf = by_subject(visits, 4) if whole else dd.from_pandas(visits, npartitions=4)
    out = pfd.map_subjects(ddf, placement, id=["site", "subject"], tables={"labs": dd.from_pandas(side, 3)},
                           whole_subjects=whole, meta=META).compute()
    assert len(out) == 4
    for main, table in zip(out["main"], out["side"]):
        mine = set(main)
        others = set().union(*[set(m) for m in out["main"]]) - mine
        assert not set(table) & others  # no record meets another partition's subject
    assert out["rows"].sum() == len(side)  # every record is somewhere, once
    held = {k for m in out["side"] for k in m}
    assert held == set(zip(side["site"], side["subject"].astype(int)))


def test_side_table_ids_of_another_kind_are_refused(visits):
    side = labs(visits).assign(subject=lambda d: d["subject"].astype(str))
    with pytest.raises(pfx.OptionError, match="subject"):
        pfd.map_subjects(dd.from_pandas(visits, 2), placement, id=["site", "subject"], tables={"labs": side},
                         meta=META)


def lab_values(visits: pd.DataFrame) -> pd.DataFrame:
    """An invented side table of lab draws: a few per subject, at times around the visits."""
    rng = np.random.default_rng(5)
    draws = visits.sample(frac=0.6, random_state=5)[["site", "subject", "visit_date"]]
    drawn = draws["visit_date"] - pd.to_timedelta(rng.integers(0, 20, len(draws)), unit="D")
    out = pd.DataFrame({"site": draws["site"].to_numpy(), "subject": draws["subject"].to_numpy(),
                        "drawn": drawn.to_numpy(), "alt": rng.normal(30, 6, len(draws)).round(1)})
    return out.drop_duplicates(["site", "subject", "drawn"])


@pytest.mark.parametrize("whole", [False, True])
def test_side_tables_give_what_single_process_derive_gives(visits, whole):
    side = lab_values(visits)
    steps = [pfx.as_of("labs", "alt", time="drawn", within="30D", keep=("value", "age")), pfx.lag("sbp")]
    ddf = by_subject(visits, 3) if whole else dd.from_pandas(visits, 4)
    got = pfd.derive(ddf, *steps, **KEYS, tables={"labs": dd.from_pandas(side, 3)}, whole_subjects=whole).compute()
    want = pfx.derive(visits, *steps, **KEYS, tables={"labs": side})
    assert_same_rows(got, want, ["alt_asof", "alt_asof_age", "sbp_lag1"])
    assert want["alt_asof"].notna().sum() > 1000


def test_order_is_passed_on_to_derive(visits):
    # tied occasions: 40 visits recorded twice, the copy second by "seq"
    tied = pd.concat([visits.assign(seq=0), visits.iloc[:40].assign(seq=1, sbp=lambda d: d["sbp"] + 1)])
    tied.index = pd.RangeIndex(len(tied)) * 2 + 1
    got = pfd.derive(dd.from_pandas(tied, 3), pfx.lag("sbp"), pfx.occasion(), **KEYS, order="seq").compute()
    want = pfx.derive(tied, pfx.lag("sbp"), pfx.occasion(), **KEYS, order="seq")
    assert_same_rows(got, want, ["sbp_lag1", "occasion"])


# ----------------------------------------------------------------------------- frame-level functions


def test_subject_summary_equals_single_process(visits):
    got = pfd.subject_summary(dd.from_pandas(visits, 4), ["sbp", "salt_g"], **KEYS).compute()
    want = pfx.subject_summary(visits, ["sbp", "salt_g"], **KEYS)
    key = ["site", "subject"]
    got = got.sort_values(key).reset_index(drop=True)
    want = want.sort_values(key).reset_index(drop=True)
    pd.testing.assert_frame_equal(got.drop(columns="site"), want.drop(columns="site"), check_exact=True)
    assert (got["site"].astype(str) == want["site"].astype(str)).all()
    # Outside reference: pandas' groupby counts the occasions.
    sizes = visits.groupby(key).size().sort_index()
    assert (got.set_index(key)["n_occasions"].sort_index().to_numpy() == sizes.to_numpy()).all()


def same_rows_any_order(got: pd.DataFrame, want: pd.DataFrame, key: list[str]) -> None:
    """Equal rows, whatever their order; integer and true/false columns may be nullable in the
    dask result (Int64, boolean), so values are compared with missing as None."""
    def plain(d):
        d = d.sort_values(key, kind="stable").reset_index(drop=True)
        return d.astype(object).where(d.notna(), None)
    pd.testing.assert_frame_equal(plain(got), plain(want), check_exact=True)


def test_collapse_ties_visit_grid_and_episodes_equal_single_process(visits):
    ddf = dd.from_pandas(visits, 4)
    tied = pd.concat([visits, visits.iloc[:30].assign(sbp=np.nan)]).reset_index(drop=True)
    got = pfd.collapse_ties(dd.from_pandas(tied, 3), **KEYS, rules={"sbp": "mean"}).compute()
    want = pfx.collapse_ties(tied, **KEYS, rules={"sbp": "mean"})
    # the audit column lists the combined rows' labels in row order, which a shuffle changes
    def labels(d):
        return d.assign(source_rows=d["source_rows"].map(lambda r: r if r is None else tuple(sorted(r))))
    same_rows_any_order(labels(got), labels(want), ["site", "subject", "visit_date"])

    plan = pfx.windows([("Start", -10, 15, 0), ("Month 3", 60, 120, 90), ("Month 6", 150, 210, 180)])
    pick = pfx.visit_pick("sbp", "nearest", prefer="later")
    got = pfd.visit_grid(ddf, plan, **KEYS, day="day", pick=pick).compute()
    same_rows_any_order(got, pfx.visit_grid(visits, plan, **KEYS, day="day", pick=pick),
                        ["site", "subject", "visit_number"])

    follow = visits.assign(end=visits.groupby(["site", "subject"])["day"].transform("max") + 30)
    falls = follow.loc[follow["dizzy"], ["site", "subject", "day"]].drop_duplicates(["site", "subject", "day"])
    options = dict(id=["site", "subject"], time="day", exit="end", covariates=["dose_mg"])
    got = pfd.episodes(dd.from_pandas(follow, 4), **options, events=falls).compute()
    want = pfx.episodes(follow, **options, events=falls)
    assert want["event"].sum() > 100
    same_rows_any_order(got, want, ["site", "subject", "episode"])


def test_check_finds_what_single_process_check_finds(visits):
    df = pd.concat([visits, visits.iloc[:3].set_axis([1, 2, 4])])  # three duplicate occasions
    options = dict(spacing="30D", tolerance="7D", notes=True)
    got = pfd.check(dd.from_pandas(df, 4), **KEYS, **options).compute()
    want = pfx.check(df, **KEYS, **options)
    want = want.loc[want["problem"] != "not_in_order"]

    def canon(r):
        return sorted(map(str, r.itertuples(index=False, name=None)))

    assert len(got) == len(want) > 3 and canon(got) == canon(want)
    assert (got["problem"] == "duplicate").sum() == 6


def test_data_errors_are_raised_on_compute_naming_the_partition(visits):
    df = pd.concat([visits, visits.iloc[:1].set_axis([1])])
    out = pfd.derive(dd.from_pandas(df, 3), pfx.lag("sbp"), **KEYS)
    with pytest.raises(pfx.DuplicateOccasionError, match="in partition") as info:
        out.compute()
    assert info.value.ids == [tuple(visits.iloc[0][["site", "subject"]])]


def test_integers_beyond_float_precision_are_not_rounded(visits):
    df = visits.assign(code=np.int64(2**60) + np.arange(len(visits)))
    out = pfd.derive(dd.from_pandas(df, 2), pfx.lag("code"), **KEYS)
    with pytest.raises(pfx.PrecisionError, match="Int64"):
        out.compute()
    nullable = df.assign(code=df["code"].astype("Int64"))
    got = pfd.derive(dd.from_pandas(nullable, 2), pfx.lag("code"), **KEYS).compute()
    want = pfx.derive(nullable, pfx.lag("code"), **KEYS)
    assert got["code_lag1"].dtype == "Int64"
    assert_same_rows(got, want, ["code_lag1"])


def test_helper_column_names_are_refused(visits):
    with pytest.raises(pfx.OptionError, match="__panelfx_hash"):
        pfd.derive(dd.from_pandas(visits.assign(__panelfx_hash=1), 2), pfx.lag("sbp"), **KEYS)


def test_options_are_checked(visits):
    ddf = dd.from_pandas(visits, 2)
    with pytest.raises(pfx.OptionError, match="if_split"):
        pfd.derive(ddf, pfx.lag("sbp"), **KEYS, if_split="ignore")
    with pytest.raises(pfx.OptionError, match="npartitions"):
        pfd.derive(ddf, pfx.lag("sbp"), **KEYS, npartitions=0)
    with pytest.raises(pfx.OptionError, match="row_order"):
        pfd.derive(ddf, pfx.lag("sbp"), **KEYS, row_order="sorted")
    with pytest.raises(pfx.OptionError, match="whole_subjects"):
        pfd.derive(ddf, pfx.lag("sbp"), **KEYS, whole_subjects=True, npartitions=5)
    with pytest.raises(TypeError, match="dask DataFrame"):
        pfd.derive(visits, pfx.lag("sbp"), **KEYS)


# ----------------------------------------------------------------------------- the stable hash


def test_subject_hash_is_the_same_for_equal_ids_in_any_dtype():
    ints = [pd.Series([1, -2, 2**40], dtype=d) for d in ("int64", "Int64", "int64[pyarrow]")]
    ints.append(pd.Series([1, -2, 2**40], dtype="float64").astype("int64"))
    small = [pd.Series([1, 2, 3], dtype=d) for d in ("int8", "int32", "uint16", "UInt32", "int64")]
    words = ["a", "bb", "ccc"]
    texts = [pd.Series(words, dtype=d) for d in (object, "str", "string[python]", "string[pyarrow]", "category")]
    texts.append(pd.Series(pd.Categorical(words, categories=["zz", "ccc", "bb", "a"])))
    for family in (ints, small, texts):
        hashes = [subject_hash(pd.DataFrame({"k": s}), ["k"]) for s in family]
        for h in hashes[1:]:
            assert (h == hashes[0]).all()
    # Outside reference: a single text id hashes as pandas' hash_pandas_object of its values.
    assert (subject_hash(pd.DataFrame({"k": words}), ["k"])
            == pd.util.hash_pandas_object(pd.Series(words), index=False).to_numpy()).all()


def test_subject_hash_is_stable_across_runs_and_keeps_kinds_and_parts_apart():
    # A fixed value: partitions written by one run are met by the next (no per-process salt).
    assert subject_hash(pd.DataFrame({"k": [12345]}), ["k"])[0] == subject_hash(
        pd.DataFrame({"k": pd.array([12345], dtype="Int16")}), ["k"])[0]
    assert int(subject_hash(pd.DataFrame({"k": ["a"]}), ["k"])[0]) == 13950350942979735504
    assert subject_hash(pd.DataFrame({"k": [1]}), ["k"])[0] != subject_hash(pd.DataFrame({"k": ["1"]}), ["k"])[0]
    two = pd.DataFrame({"a": ["x", "y"], "b": [1, 1]})
    swapped = pd.DataFrame({"a": ["y", "x"], "b": [1, 1]})
    h, g = subject_hash(two, ["a", "b"]), subject_hash(swapped, ["a", "b"])
    assert h[0] == g[1] and h[0] != h[1]
    missing = subject_hash(pd.DataFrame({"k": pd.array([0, None, None], dtype="Int64")}), ["k"])
    assert missing[1] == missing[2] != missing[0]
    aware = pd.Series(pd.to_datetime(["2024-01-01 12:00"]).tz_localize("Europe/Oslo"))
    naive_utc = pd.Series(pd.to_datetime(["2024-01-01 11:00"]))
    assert subject_hash(pd.DataFrame({"k": aware}), ["k"])[0] == subject_hash(pd.DataFrame({"k": naive_utc}), ["k"])[0]


# ----------------------------------------------------------------------------- a distributed cluster


@pytest.fixture(scope="module")
def client():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as lc, \
            distributed.Client(lc) as c:
        yield c


def test_on_a_local_cluster(visits, client):
    ddf = dd.from_pandas(text_ids(visits), npartitions=4)
    with dask.config.set(scheduler=client):
        got = pfd.derive(ddf, *transforms(), id="pid", time="visit_date", npartitions=3).compute()
        want = pfx.derive(text_ids(visits), *transforms(), id="pid", time="visit_date")
        assert_same_rows(got, want, [c for c in want.columns if c not in ddf.columns])
        with pytest.raises(pfx.SplitSubjectError) as info:  # the typed error crosses the cluster intact
            pfd.derive(split_frame(visits), pfx.lag("sbp"), **KEYS, whole_subjects=True).compute()
        assert info.value.ids == [("Brookfield", 25)]
