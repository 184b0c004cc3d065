"""The correctness kit itself: each assertion passes on good data and fails, with a message
naming the column, subject ids and row labels, on bad data; the strategies generate what
they promise; the reference dispatcher behaves."""

from __future__ import annotations

import dataclasses
import subprocess
import sys
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd
import pytest
from hypothesis import find, given, settings

import panelfx as pfx
from panelfx._panel import Panel
from panelfx._transform import Transform
from panelfx.testing import (
    assert_constant_within,
    assert_derived_from,
    assert_matches_reference,
    assert_non_decreasing_within,
    assert_non_increasing_within,
    assert_panel_structure,
    assert_past_only,
    reference,
)
from panelfx.testing.strategies import ALL_ID_KINDS, ALL_TIME_KINDS, INDEX_KINDS, VALUE_KINDS, panels


def visits() -> pd.DataFrame:
    """Invented: three subjects, unsorted rows, a string index."""
    return pd.DataFrame(
        {"pid": ["b", "a", "a", "c", "a", "b"], "day": [0, 14, 0, 0, 28, 7],
         "y": [5.0, 2.0, 1.0, 9.0, None, 6.0]},
        index=["r1", "r2", "r3", "r4", "r5", "r6"],
    )


def message(excinfo: pytest.ExceptionInfo[AssertionError]) -> str:
    return str(excinfo.value)


# --------------------------------------------------------------------------- constant within
def test_constant_within_passes_on_a_carried_baseline():
    out = pfx.derive(visits(), pfx.baseline("y"), id="pid", time="day")
    assert_constant_within(out, "y_baseline", id="pid")


def test_constant_within_names_column_subject_and_rows():
    df = visits().assign(base=[5.0, 1.0, 1.0, 9.0, 1.5, 5.0])
    with pytest.raises(AssertionError) as ei:
        assert_constant_within(df, "base", id="pid")
    msg = message(ei)
    assert "column 'base' is not constant within subject: 1 subject(s), 1 row(s)" in msg
    assert "first subject ids: ['a']" in msg and "first row labels: ['r5']" in msg


def test_constant_within_missing_values():
    """All-missing subjects are constant; a missing/present mix is not, unless ignored."""
    df = visits().assign(base=[np.nan, 1.0, 1.0, 9.0, np.nan, np.nan])
    with pytest.raises(AssertionError, match=r"first subject ids: \['a'\]"):
        assert_constant_within(df, "base", id="pid")
    assert_constant_within(df, "base", id="pid", ignore_missing=True)
    with pytest.raises(AssertionError, match="'b'"):
        assert_constant_within(df.assign(base=[1.0, 1.0, 1.0, 9.0, np.nan, 2.0]), "base", id="pid",
                               ignore_missing=True)


def test_constant_within_text_and_multi_id():
    df = pd.DataFrame({"site": ["A", "A", "B", "B"], "pid": [1, 1, 1, 1], "arm": ["x", "x", "x", "y"]})
    with pytest.raises(AssertionError, match=r"first subject ids: \[\('B', 1\)\]"):
        assert_constant_within(df, "arm", id=["site", "pid"])
    assert_constant_within(df.iloc[:3], "arm", id=["site", "pid"])


# --------------------------------------------------------------------------- monotonic
def test_non_decreasing_in_time_order_not_row_order():
    df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [20, 0, 10, 5, 0], "cum": [3.0, 0.0, 2.0, 1.0, 1.0]},
                      index=list("abcde"))
    assert_non_decreasing_within(df, "cum", id="pid", time="day")
    with pytest.raises(AssertionError, match="not increasing"):
        assert_non_decreasing_within(df, "cum", id="pid", time="day", strict=True)
    with pytest.raises(AssertionError) as ei:
        assert_non_increasing_within(df, "cum", id="pid", time="day")
    assert "first subject ids: [1]" in message(ei) and "first row labels: ['a', 'c']" in message(ei)


def test_non_decreasing_skips_or_fails_on_missing():
    df = pd.DataFrame({"pid": [1, 1, 1], "day": [0, 1, 2], "cum": [1.0, np.nan, 0.5]}, index=[10, 11, 12])
    with pytest.raises(AssertionError) as ei:
        assert_non_decreasing_within(df, "cum", id="pid", time="day")
    msg = message(ei)
    assert "column 'cum' is not non-decreasing" in msg and "first row labels: [12]" in msg
    ok = df.assign(cum=[1.0, np.nan, 1.5])
    assert_non_decreasing_within(ok, "cum", id="pid", time="day")
    with pytest.raises(AssertionError, match=r"missing values fail.*\n.*\n.*first row labels: \[11\]"):
        assert_non_decreasing_within(ok, "cum", id="pid", time="day", ignore_missing=False)


# --------------------------------------------------------------------------- past-only
@dataclasses.dataclass(frozen=True, kw_only=True)
class _PeekNext(Transform):
    """A deliberately wrong transform for the tests: claims past-only but reads the next row."""

    type_name = ""  # not registered
    col: str

    def inputs(self) -> tuple[str, ...]:
        return (self.col,)

    def outputs(self) -> tuple[str, ...]:
        return (f"{self.col}_peek",)

    @property
    def past_only(self) -> bool:
        return True

    def describe(self) -> str:
        return "peeks"

    def compute(self, panel: Panel) -> Sequence[Any]:
        y = panel.columns.numeric(self.col)
        nxt = np.r_[y[1:], np.nan]
        last = panel.subjects.pos == panel.subjects.size - 1
        return [np.where(last, y, nxt)]


def test_past_only_passes_for_past_only_transforms():
    assert_past_only(visits(), pfx.lag("y"), pfx.change_from_previous("y", "rate"), id="pid", time="day")


def test_past_only_refuses_a_transform_that_declares_the_future():
    with pytest.raises(AssertionError, match=r"transform #2 \(baseline\) declares that it uses later"):
        assert_past_only(visits(), pfx.lag("y"), pfx.baseline("y"), id="pid", time="day")


def test_past_only_catches_a_transform_that_lies():
    with pytest.raises(AssertionError) as ei:
        assert_past_only(visits(), _PeekNext(col="y"), id="pid", time="day")
    msg = message(ei)
    assert "column 'y_peek' uses later occasions" in msg and "rank 0" in msg
    assert "first subject ids: ['b', 'a']" in msg


def test_past_only_samples_ranks_on_long_subjects():
    """With many occasions only max_ranks ranks are cut, but the lie is still caught (rank 0 always is)."""
    n = 200
    df = pd.DataFrame({"pid": np.repeat([1, 2], n), "day": np.tile(np.arange(n), 2),
                       "y": np.arange(2 * n, dtype=float)})
    calls = []
    real = pfx.derive

    def counting(*a, **k):
        calls.append(1)
        return real(*a, **k)

    import panelfx.testing.assertions as A

    old = A.derive
    A.derive = counting
    try:
        assert_past_only(df, pfx.lag("y"), id="pid", time="day", max_ranks=5)
        assert len(calls) == 1 + 5
        with pytest.raises(AssertionError):
            assert_past_only(df, _PeekNext(col="y"), id="pid", time="day", max_ranks=3)
    finally:
        A.derive = old


# --------------------------------------------------------------------------- re-derivation
def test_derived_from_passes_and_names_the_changed_row():
    src = visits()
    steps = (pfx.baseline("y"), pfx.change_from_baseline("y"))
    stored = pfx.derive(src, *steps, id="pid", time="day")
    assert_derived_from(stored, src, *steps, id="pid", time="day")
    tampered = stored.copy()
    tampered.loc["r2", "y_change"] = 0.5
    with pytest.raises(AssertionError) as ei:
        assert_derived_from(tampered, src, *steps, id="pid", time="day")
    msg = message(ei)
    assert "column 'y_change' differs from its re-derivation: 1 subject(s), 1 row(s)" in msg
    assert "first subject ids: ['a']" in msg and "first row labels: ['r2']" in msg


def test_derived_from_source_columns_and_missing_outputs():
    src = visits()
    stored = pfx.derive(src, pfx.lag("y"), id="pid", time="day")
    with pytest.raises(AssertionError, match="differs from the source"):
        assert_derived_from(stored.assign(y=stored["y"] + 1), src, pfx.lag("y"), id="pid", time="day")
    with pytest.raises(AssertionError, match=r"lacks column\(s\) \['y_lag1'\]"):
        assert_derived_from(src, src, pfx.lag("y"), id="pid", time="day")


def test_derived_from_matches_rows_by_keys_after_a_file_round_trip():
    """A frame written to CSV and read back lost its index and integer dtypes."""
    src = visits()
    stored = pfx.derive(src, pfx.lag("y"), pfx.baseline("y"), id="pid", time="day")
    back = stored.sort_values(["pid", "day"]).reset_index(drop=True)
    with pytest.raises(AssertionError, match="row labels not in the source"):
        assert_derived_from(back, src, pfx.lag("y"), pfx.baseline("y"), id="pid", time="day")
    assert_derived_from(back, src, pfx.lag("y"), pfx.baseline("y"), id="pid", time="day", match="keys")
    floats = back.assign(day=back["day"].astype("float64"))
    with pytest.raises(AssertionError, match="dtype float64 but its re-derivation has int64"):
        assert_derived_from(floats, src, pfx.lag("y"), id="pid", time="day", match="keys")
    floats.loc[0, "day"] = 99.0
    with pytest.raises(AssertionError, match="keys not found"):
        assert_derived_from(floats, src, pfx.lag("y"), id="pid", time="day", match="keys", check_dtype=False)


# --------------------------------------------------------------------------- structure
def test_panel_structure():
    df = visits()
    assert_panel_structure(df, id="pid", time="day")
    bad = pd.concat([df, df.iloc[[0]].rename(index={"r1": "r7"})])
    bad.loc["r3", "pid"] = None
    with pytest.raises(AssertionError) as ei:
        assert_panel_structure(bad, id="pid", time="day")
    msg = message(ei)
    assert "3 problem row(s) (null_id: 1, duplicate: 2)" in msg
    assert "first row labels: ['r3', 'r1', 'r7']" in msg and "'b'" in msg


def test_panel_structure_with_a_visit_schedule():
    df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 7, 21, 0, 8]}, index=list("abcde"))
    assert_panel_structure(df.iloc[[0, 1, 3]], id="pid", time="day", spacing=7, tolerance=1)
    with pytest.raises(AssertionError) as ei:
        assert_panel_structure(df, id="pid", time="day", spacing=7, tolerance=0)
    msg = message(ei)
    assert "missed: 1" in msg and "late: 1" in msg and "first subject ids: [1, 2]" in msg


# --------------------------------------------------------------------------- matches reference
def test_matches_reference_message_and_lengths():
    df = visits()
    got = pfx.derive(df, pfx.lag("y"), id="pid", time="day")
    want = reference(df, pfx.lag("y"), id="pid", time="day")
    assert_matches_reference(got, want, ["y_lag1"], id="pid", time="day")
    wrong = got.assign(y_lag1=got["y_lag1"].fillna(0.0))
    with pytest.raises(AssertionError) as ei:
        assert_matches_reference(wrong, want, ["y_lag1"], id="pid", time="day")
    msg = message(ei)
    assert "column 'y_lag1' differs from the reference: 3 of 6 values (50.0%)" in msg
    assert "first row labels: ['r1', 'r3', 'r4']" in msg
    with pytest.raises(AssertionError, match="got 5 rows, the reference 6"):
        assert_matches_reference(got.iloc[:5], want)
    with pytest.raises(AssertionError, match="missing from the got frame"):
        assert_matches_reference(df, want, ["y_lag1"])


def test_matches_reference_tolerance_and_text():
    a = pd.DataFrame({"v": [1.0, np.nan], "s": ["x", None]})
    assert_matches_reference(a.assign(v=[1.0 + 1e-12, np.nan]), a)
    with pytest.raises(AssertionError, match="column 'v'"):
        assert_matches_reference(a.assign(v=[1.001, np.nan]), a)
    with pytest.raises(AssertionError, match="column 's'"):
        assert_matches_reference(a.assign(s=["y", None]), a)


# --------------------------------------------------------------------------- reference
def test_reference_leaves_input_alone_and_refuses_unknown_types():
    df = visits()
    before = df.copy()
    reference(df, pfx.baseline("y"), pfx.lag("y"), id="pid", time="day")
    pd.testing.assert_frame_equal(df, before)
    with pytest.raises(NotImplementedError, match="no reference implementation"):
        reference(df, _PeekNext(col="y"), id="pid", time="day")


def test_public_names():
    import panelfx.testing as T

    for name in T.__all__:
        assert getattr(T, name) is not None
    assert T.panels is panels
    with pytest.raises(AttributeError):
        T.no_such_thing  # noqa: B018


def test_strategies_need_hypothesis_with_a_clear_message():
    """Without hypothesis the strategies refuse with an install hint; the rest of the kit works."""
    code = (
        "import sys; sys.modules['hypothesis'] = None\n"
        "import panelfx.testing as T\n"
        "T.assert_constant_within\n"
        "try:\n    T.panels\nexcept ImportError as e:\n    print(e)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert "needs hypothesis" in out and "pip install" in out


def test_the_kit_never_changes_its_input():
    df = visits()
    stored = pfx.derive(df, pfx.baseline("y"), id="pid", time="day")
    frames = {"df": df, "stored": stored}
    before = {k: v.copy(deep=True) for k, v in frames.items()}
    assert_constant_within(stored, "y_baseline", id="pid")
    assert_non_decreasing_within(df.assign(y=df["day"]), "y", id="pid", time="day")
    assert_past_only(df, pfx.lag("y"), id="pid", time="day")
    assert_derived_from(stored, df, pfx.baseline("y"), id="pid", time="day", match="keys")
    assert_panel_structure(df, id="pid", time="day")
    reference(df, pfx.baseline("y"), id="pid", time="day")
    for k, v in frames.items():
        pd.testing.assert_frame_equal(v, before[k], check_exact=True)


# --------------------------------------------------------------------------- strategies
def _structure(case) -> None:
    f = case.frame
    id_cols = [case.id] if isinstance(case.id, str) else case.id
    assert f[id_cols].notna().all().all() and f[case.time].notna().all()
    assert not f.duplicated([*id_cols, case.time]).any()
    assert f.index.is_unique
    assert {"y", "x", "flag", "dose"} <= set(f.columns)
    assert (f["dose"] >= 0).all()


@given(case=panels(id_kinds=ALL_ID_KINDS, time_kinds=ALL_TIME_KINDS, index_kinds=INDEX_KINDS,
                   value_kinds=VALUE_KINDS, extremes=True))
def test_panels_are_valid_panels(case):
    """Every generated panel is well formed: no null keys, unique (id, time), unique labels."""
    _structure(case)
    assert_panel_structure(case.frame, **case.keys)


def test_panels_cover_the_promised_cases():
    """Each promised feature shows up among a few hundred generated panels."""
    def ids(c):
        return [c.frame[k] for k in np.atleast_1d(c.id)]

    def sizes(c):
        return c.frame.groupby(ids(c), observed=True).size()

    def blank(c):
        return c.frame["y"].isna().groupby(ids(c), observed=True).all()

    checks = {
        "single-occasion subject": lambda c: (sizes(c) == 1).any() and (sizes(c) > 1).any(),
        "all-missing subject": lambda c: blank(c).any() and not blank(c).all(),
        "tied values": lambda c: c.frame["y"].dropna().duplicated().any(),
        "shuffled rows": lambda c: Panel(c.frame, **c.keys).ordering.order is not None,
        "string index": lambda c: c.frame.index.dtype != "int64",
        "integer index with gaps": lambda c: c.frame.index.dtype == "int64" and len(c.frame) > 1
        and not isinstance(c.frame.index, pd.RangeIndex),
        "tz-aware time": lambda c: getattr(c.frame["t"].dtype, "tz", None) is not None,
        "naive datetime time": lambda c: c.frame["t"].dtype.kind == "M",
        "float time": lambda c: c.frame["t"].dtype == "float64",
        "categorical id": lambda c: isinstance(c.frame["pid"].dtype, pd.CategoricalDtype),
        "two id columns": lambda c: isinstance(c.id, list),
    }
    seen: set[str] = set()

    @settings(max_examples=200, database=None, derandomize=True)
    @given(case=panels())
    def collect(case):
        seen.update(what for what, cond in checks.items() if cond(case))

    collect()
    assert seen == set(checks), sorted(set(checks) - seen)
    extremes: list[bool] = []

    @settings(max_examples=50, database=None, derandomize=True)
    @given(case=panels(extremes=True))
    def collect_extremes(case):
        extremes.append(bool((case.frame["y"].abs() >= 1e12).any()))

    collect_extremes()
    assert any(extremes)
    empty = find(panels(subjects=(0, 2)), lambda c: len(c.frame) == 0, settings=settings(database=None))
    assert len(pfx.derive(empty.frame, pfx.lag("y"), pfx.baseline("y"), **empty.keys)) == 0


@pytest.mark.parametrize("kinds", [{"id_kinds": ("bogus",)}, {"time_kinds": ()}, {"index_kinds": ("x",)}])
def test_panels_reject_unknown_kinds(kinds):
    with pytest.raises(ValueError, match="must be a non-empty selection"):
        find(panels(**kinds), lambda c: True)


@given(case=panels(shuffle=False, missing=False, subjects=(2, 3), occasions=(2, 2)))
def test_panels_options(case):
    """shuffle=False keeps rows sorted with a default index; missing=False has no missing y."""
    assert isinstance(case.frame.index, pd.RangeIndex)
    assert Panel(case.frame, **case.keys).ordering.order is None
    assert case.frame["y"].notna().all()
    assert len(case.frame) == 2 * case.frame.groupby(case.id, observed=True).ngroups


# --------------------------------------------------------------------------- README section
def _readme_section() -> str:
    from pathlib import Path

    text = (Path(__file__).parent.parent / "README.md").read_text()
    start = text.index("## Testing your derived variables")
    return text[start:text.index("\n## ", start + 1)]


def test_readme_example_test_file_passes(tmp_path):
    """The copyable test file in the README runs green under pytest."""
    section = _readme_section()
    code = section.split("```python\n")[1].split("```")[0]
    (tmp_path / "test_derived_variables.py").write_text(code)
    run = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "-p", "no:randomly",
                          "-W", "error", str(tmp_path / "test_derived_variables.py")],
                         capture_output=True, text=True, cwd=tmp_path)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "4 passed" in run.stdout


def test_readme_failure_message_is_real():
    """The failure shown in the README is what the assertion prints."""
    section = _readme_section()
    shown = section.split("```text\n")[1].split("```")[0].strip()
    visits = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 61, 0, 29],
                           "sbp": [152.0, 147.0, None, 139.0, 141.0], "dose_mg": [0.0, 50.0, 50.0, 0.0, 25.0]})
    out = pfx.derive(visits, pfx.cumulative("dose_mg"), id="pid", time="day")
    out.loc[4, "dose_mg_cum"] = -5.0
    with pytest.raises(AssertionError) as ei:
        assert_non_decreasing_within(out, "dose_mg_cum", id="pid", time="day")
    assert "AssertionError: " + str(ei.value) == shown
