"""Saved derivations as JSON: an exact round trip for every registered transform, and a
matrix of malformed files that each fail with an error naming the key and its path."""

from __future__ import annotations

import dataclasses
import json
import os
import typing
from typing import Any, Literal

import pytest
from catalogue import ENTRIES
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx import Derivation, DerivationFileError
from panelfx._panel import UNITS_NS
from panelfx._transform import REGISTRY, Transform, check_column_name
from panelfx.derivation import FORMAT, VERSION

# ------------------------------------------------------------------------------ round trip

_COLUMNS = ["y", "x", "flag", "dose", "sbp", "ref_t", "ß-wert", "a b"]


def _values(hint: Any) -> st.SearchStrategy[Any]:
    """Plain JSON-like values fitting a field annotation (whether the transform accepts
    them is up to its own validation)."""
    if hint is type(None):
        return st.none()
    origin, args = typing.get_origin(hint), typing.get_args(hint)
    if args and (origin is typing.Union or type(hint).__name__ == "UnionType"):
        return st.one_of([_values(a) for a in args])
    if hint is bool:
        return st.booleans()
    if hint is int:
        return st.integers(-4, 12)
    if hint is float:
        return st.one_of(st.floats(-1e6, 1e6, allow_nan=False), st.sampled_from([0.1, 1e-300, 2.5, 30.0, 7]))
    if hint is str:
        return st.one_of(st.sampled_from(_COLUMNS), st.sampled_from(["30D", "12h", "2W", "mean", "sum", "last",
                                                                     "first", "left", "both", "percent"]))
    if origin is tuple:
        if len(args) == 2 and args[1] is Ellipsis:
            return st.lists(_values(args[0]), max_size=3).map(tuple)
        return st.tuples(*[_values(a) for a in args])
    if origin is list:
        return st.lists(_values(args[0]), max_size=3)
    return st.nothing()


@st.composite
def transforms(draw: st.DrawFn, i: int) -> Transform:
    """A catalogue example of any registered type, with some options changed to other values the
    transform accepts (generic: driven by the field annotations, not by per-transform code)."""
    _, entry = draw(st.sampled_from(ENTRIES))
    tr = entry.build(draw(st.booleans()))
    hints = typing.get_type_hints(type(tr))
    for f in dataclasses.fields(tr):
        if not f.init or not draw(st.booleans()):
            continue
        value = draw(_values(hints.get(f.name, Any)))
        try:
            tr = dataclasses.replace(tr, **{f.name: value})
        except (pfx.PanelError, TypeError, ValueError):
            pass  # keep a configuration the transform accepts
    fields = {f.name for f in dataclasses.fields(tr)}
    if "names" in fields and (len(tr.outputs()) > 1 or "name" not in fields):
        tr = dataclasses.replace(tr, names=tuple(f"o{i}_{k}" for k in range(len(tr.outputs()))))
    elif "name" in fields:
        tr = dataclasses.replace(tr, name=f"o{i}")
    return tr


@st.composite
def derivations(draw: st.DrawFn) -> Derivation:
    n = draw(st.integers(0, 4))
    trs = [draw(transforms(i)) for i in range(n)]
    trs = [t for t in trs if not set(t.inputs()) & {"pid", "site", "t"}]
    id_ = draw(st.sampled_from(["pid", ("site", "pid"), ["site", "pid"]]))
    unit = draw(st.sampled_from([None, *UNITS_NS]))
    description = draw(st.text(max_size=30))
    return Derivation(*trs, id=id_, time="t", unit=unit, description=description)


def _same_types(a: Any, b: Any) -> bool:
    """Equal and of the same types all the way down (3 is not 3.0, a tuple is not a list)."""
    if type(a) is not type(b):
        return False
    if dataclasses.is_dataclass(a):
        return all(_same_types(getattr(a, f.name), getattr(b, f.name)) for f in dataclasses.fields(a))
    if isinstance(a, (list, tuple)):
        return len(a) == len(b) and all(_same_types(x, y) for x, y in zip(a, b))
    return a == b


@settings(max_examples=150, deadline=None)
@given(derivations())
def test_round_trip_is_exact(d):
    """from_json(to_json(d)) equals d with the same value types; writing again gives the same text."""
    text = d.to_json()
    again = Derivation.from_json(text)
    assert again == d
    assert _same_types(again, d)
    assert again.to_json() == text
    assert Derivation.from_json(d.to_json(indent=None)) == d
    assert Derivation.from_dict(json.loads(text)) == d


def test_every_registered_transform_round_trips():
    """Each registered type (through its catalogue examples) saves and loads."""
    seen = set()
    for type_name, entry in ENTRIES:
        tr = entry.example()
        d = Derivation(tr, id="pid", time="t")
        assert Derivation.from_json(d.to_json()).transforms == (tr,)
        seen.add(type_name)
    assert seen == set(REGISTRY)


def test_layout():
    """The file is plain JSON with a marker, a version, the panel and the transforms' options in order."""
    d = Derivation(pfx.lag("sbp", 2), id=["site", "pid"], time="visit", unit="W", description="Invented · cohort")
    doc = json.loads(d.to_json())
    assert doc == {
        "format": FORMAT, "version": VERSION, "description": "Invented · cohort",
        "panel": {"id": ["site", "pid"], "time": "visit", "unit": "W"},
        "transforms": [{"type": "lag", "options": dict(pfx.lag("sbp", 2).options())}],
    }
    assert list(doc["transforms"][0]["options"]) == [f.name for f in dataclasses.fields(pfx.lag("sbp"))]
    assert "Invented · cohort" in d.to_json()  # readable, not \\u-escaped


def test_left_out_options_take_defaults():
    """Hand-written files may give only the options that differ from the defaults."""
    text = json.dumps({"format": FORMAT, "version": VERSION, "panel": {"id": "pid", "time": "day"},
                       "transforms": [{"type": "change_from_baseline", "options": {"col": "sbp", "kind": "percent"}},
                                      {"type": "occasion"}]})
    d = Derivation.from_json(text)
    assert d.transforms == (pfx.change_from_baseline("sbp", "percent"), pfx.occasion())
    assert d.unit is None and d.description == ""


def test_save_and_load(tmp_path):
    d = Derivation(pfx.baseline("sbp"), pfx.within_between("sbp"), id="pid", time="day", description="invented")
    path = tmp_path / "derivation.json"
    d.save(path)
    assert Derivation.load(path) == d
    assert Derivation.load(str(path)) == d
    assert path.read_text(encoding="utf-8").endswith("}\n")
    assert os.listdir(tmp_path) == ["derivation.json"]  # no temporary file left behind
    path.write_text("{", encoding="utf-8")
    with pytest.raises(DerivationFileError, match=r"derivation\.json: not valid JSON"):
        Derivation.load(path)


def test_values_that_cannot_be_saved():
    """Options that are not plain JSON values fail at to_json, naming the option."""

    @dataclasses.dataclass(frozen=True, kw_only=True)
    class Loose(Transform):  # no type_name: not registered
        col: str
        level: Any = None

        def inputs(self):
            return (self.col,)

        def outputs(self):
            return (f"{self.col}_loose",)

    with pytest.raises(pfx.OptionError, match=r"transforms\[0\]\.options\.level: nan cannot be saved"):
        Derivation(Loose(col="y", level=float("nan")), id="pid", time="t").to_json()
    with pytest.raises(pfx.OptionError, match=r"transforms\[0\]\.options\.level: a set .* cannot be saved"):
        Derivation(Loose(col="y", level={1}), id="pid", time="t").to_json()
    import numpy as np

    doc = Derivation(Loose(col="y", level=[np.int64(3), (1.5,)]), id="pid", time="t").to_dict()
    assert doc["transforms"][0]["options"]["level"] == [3, [1.5]]
    assert type(doc["transforms"][0]["options"]["level"][0]) is int


@pytest.fixture
def new_transform():
    """A transform type defined after this module was written, with annotations this module
    has no special code for; removed from the registry afterwards."""

    @dataclasses.dataclass(frozen=True, kw_only=True)
    class Banded(Transform):
        type_name = "test_only_banded"
        col: str
        edges: tuple[float, ...] = (0.0, 1.0)
        labels: list[str] | None = None
        side: Literal["left", "right"] = "right"
        name: str | None = None

        def __post_init__(self) -> None:
            check_column_name("col", self.col)
            if list(self.edges) != sorted(self.edges):
                raise pfx.OptionError(f"edges must be increasing, got {list(self.edges)!r}")

        def inputs(self):
            return (self.col,)

        def outputs(self):
            return (self.name or f"{self.col}_band",)

    yield Banded
    del REGISTRY["test_only_banded"]


def test_new_transforms_need_no_code_here(new_transform):
    tr = new_transform(col="y", edges=(0.0, 2.5, 10), labels=["low", "high"], side="left")
    d = Derivation(tr, id="pid", time="t")
    again = Derivation.from_json(d.to_json())
    assert again == d and _same_types(again, d)
    doc = d.to_dict()
    for options, path, fragment in [
        ({"col": "y", "edges": [0, "1"]}, "options.edges", r"must be a list of a number values, got a list"),
        ({"col": "y", "labels": "low"}, "options.labels", r"must be a list of a string values or null"),
        ({"col": "y", "side": "middle"}, "options.side", r"must be one of 'left', 'right'"),
        ({"col": "y", "edges": [2, 1]}, "options.edges", r"edges must be increasing, got \[2, 1\]"),
    ]:
        doc["transforms"][0]["options"] = options
        with pytest.raises(DerivationFileError, match=fragment) as err:
            Derivation.from_dict(doc)
        assert err.value.path == f"transforms[0].{path}"


# ------------------------------------------------------------------------------ malformed files

_GOOD = Derivation(pfx.lag("sbp"), pfx.within_between("sbp"), pfx.baseline("sbp", "last_before", reference=3),
                   id="pid", time="day").to_dict()


def _doc(change) -> str:
    doc = json.loads(json.dumps(_GOOD))
    change(doc)
    return json.dumps(doc)


def _set(path: list[Any], value: Any):
    def change(doc):
        for key in path[:-1]:
            doc = doc[key]
        doc[path[-1]] = value
    return change


def _drop(path: list[Any]):
    def change(doc):
        for key in path[:-1]:
            doc = doc[key]
        del doc[path[-1]]
    return change


_TEXT = json.dumps(_GOOD, indent=2)
T0, T1, T2 = (["transforms", i, "options"] for i in range(3))

MALFORMED = [
    # (label, file text, path named, words in the message)
    ("truncated", _TEXT[: len(_TEXT) // 2], "", "not valid JSON: .* at line \\d+, column \\d+ \\(the file looks truncated\\)"),
    ("empty", "  \n", "", "the file is empty"),
    ("not an object", "[1, 2]", "", "must hold a JSON object, got a list"),
    ("NaN", _TEXT.replace("3", "NaN"), "transforms[2].options.reference", "NaN is not a JSON value"),
    ("Infinity", _TEXT.replace("3", "-Infinity"), "transforms[2].options.reference", "-Infinity is not a JSON value"),
    ("duplicate key", _TEXT.replace('"version": 2,', '"version": 2, "version": 2,'), "version", "duplicate key 'version'"),
    ("duplicate option", _TEXT.replace('"reference": 3', '"reference": 3, "reference": 4'),
     "transforms[2].options.reference", "duplicate key 'reference'"),
    # Python refuses to parse integers of more than 4300 digits (a ValueError, not a JSON error)
    ("huge integer", _TEXT.replace('"reference": 3', '"reference": ' + "9" * 5000),
     "transforms[2].options.reference", "an integer of 5000 digits is too large"),
    ("integer beyond int64", _TEXT.replace('"reference": 3', '"reference": ' + "1" * 25),
     "transforms[2].options.reference", "25 digits is too large"),
    ("number beyond float", _TEXT.replace('"reference": 3', '"reference": 1e999'),
     "transforms[2].options.reference", "too large to hold"),
    ("huge version", _TEXT.replace('"version": 2', '"version": ' + "1" * 30), "version", "too large"),
    ("deep nesting", _TEXT.replace('"reference": 3', '"reference": ' + "[" * 100_000 + "]" * 100_000),
     "transforms[2].options.reference" + "[0]" * 28, "nested more than 32 levels deep \\(at line \\d+, column \\d+\\)"),
    ("nesting under the stack limit", _TEXT.replace('"reference": 3', '"reference": ' + "[" * 100 + "]" * 100),
     "transforms[2].options.reference" + "[0]" * 28, "nested more than 32 levels deep$"),
    ("deep objects in a list", _doc(_set(T0 + ["col"], [0, json.loads('{"a": ' * 40 + "1" + "}" * 40)])),
     "transforms[0].options.col[1]" + ".a" * 27, "nested more than 32"),
    ("lone surrogate", _TEXT.replace('"sbp"', '"\\ud800"', 1), "transforms[0].options.col", "lone surrogate"),
    ("dict for a name", _doc(_set(T0 + ["col"], {"name": "sbp"})), "transforms[0].options.col",
     "must be a string, got an object"),
    ("list for a name", _doc(_set(T0 + ["col"], ["sbp"])), "transforms[0].options.col", "must be a string, got a list"),
    ("bool for a name", _doc(_set(T0 + ["col"], True)), "transforms[0].options.col", "must be a string, got true/false"),
    ("long value shown short", _doc(_set(T0 + ["col"], list(range(10_000)))), "transforms[0].options.col",
     "got a list \\(\\[0, 1, 2, .{20,50} \\.\\.\\. 998, 9999\\]\\)$"),
    ("unit a list", _doc(_set(["panel", "unit"], ["D"])), "panel.unit", "must be null or one of"),
    ("time_unit an object", _doc(_set(["panel", "time_unit"], {})), "panel.time_unit", "must be null or one of"),
    ("no format", _doc(_drop(["format"])), "format", "not a saved panelfx derivation"),
    ("other format", _doc(_set(["format"], "something.else")), "format", "format is 'something.else'"),
    ("no version", _doc(_drop(["version"])), "version", "missing key"),
    ("newer version", _doc(_set(["version"], 3)), "version", "version 3 is not supported.*newer panelfx"),
    ("version 0", _doc(_set(["version"], 0)), "version", "version 0 is not supported"),
    ("version as text", _doc(_set(["version"], "1")), "version", "must be an integer, got '1'"),
    ("unknown top key", _doc(_set(["panelfx_version"], "0.1")), "panelfx_version", "unknown key"),
    ("no panel", _doc(_drop(["panel"])), "panel", "missing key"),
    ("panel not object", _doc(_set(["panel"], ["pid", "day"])), "panel", "must be an object"),
    ("unknown panel key", _doc(_set(["panel", "units"], "D")), "panel.units", "unknown key"),
    ("id a number", _doc(_set(["panel", "id"], 7)), "panel.id", "must be a column name or a list"),
    ("id list of numbers", _doc(_set(["panel", "id"], [1, 2])), "panel.id", "must be a column name or a list"),
    ("no time", _doc(_drop(["panel", "time"])), "panel.time", "missing key"),
    ("time a list", _doc(_set(["panel", "time"], ["day"])), "panel.time", "must be a column name"),
    ("unknown unit", _doc(_set(["panel", "unit"], "days")), "panel.unit", "must be null or one of"),
    ("time is id", _doc(_set(["panel", "time"], "pid")), "panel", "also an id column"),
    ("description a number", _doc(_set(["description"], 5)), "description", "must be a string"),
    ("transforms an object", _doc(_set(["transforms"], {"type": "lag"})), "transforms", "must be a list"),
    ("transform a string", _doc(_set(["transforms", 0], "lag")), "transforms[0]", "must be an object"),
    ("no type", _doc(_drop(["transforms", 1, "type"])), "transforms[1].type", "missing key"),
    ("unknown transform", _doc(_set(["transforms", 1, "type"], "os.system")), "transforms[1].type",
     "unknown transform 'os.system' \\(known: \\["),
    ("dotted transform name", _doc(_set(["transforms", 0, "type"], "panelfx.derive")), "transforms[0].type",
     "unknown transform"),
    ("type a number", _doc(_set(["transforms", 0, "type"], 3)), "transforms[0].type", "must be the name"),
    ("unknown transform key", _doc(_set(["transforms", 0, "params"], {})), "transforms[0].params", "unknown key"),
    ("options a list", _doc(_set(T0, ["sbp"])), "transforms[0].options", "must be an object"),
    ("unknown option", _doc(_set(T0 + ["perods"], 2)), "transforms[0].options.perods",
     "unknown option of transform 'lag' \\(options: \\['col'"),
    ("missing required option", _doc(_drop(T1 + ["col"])), "transforms[1].options.col", "missing option"),
    ("text for an integer", _doc(_set(T0 + ["periods"], "2")), "transforms[0].options.periods",
     "must be an integer or null, got a string \\('2'\\)"),
    ("float for an integer", _doc(_set(T0 + ["periods"], 1.5)), "transforms[0].options.periods",
     "must be an integer or null"),
    ("bool for an integer", _doc(_set(T0 + ["periods"], True)), "transforms[0].options.periods",
     "got true/false"),
    ("rule broken", _doc(_set(T0 + ["periods"], 0)), "transforms[0].options.periods",
     "periods must be a non-zero integer, got 0"),
    ("number for a name", _doc(_set(T0 + ["col"], 5)), "transforms[0].options.col", "must be a string, got an integer"),
    ("empty column name", _doc(_set(T0 + ["col"], "")), "transforms[0].options.col", "col must be a column name"),
    ("bad choice", _doc(_set(T1 + ["between"], "median")), "transforms[1].options.between",
     "must be one of 'mean', 'baseline', got a string \\('median'\\)"),
    ("names of wrong length", _doc(_set(T1 + ["names"], ["a", "b", "c"])), "transforms[1].options.names",
     "names must be two different column names"),
    ("names not a list", _doc(_set(T1 + ["names"], "ab")), "transforms[1].options.names", "got a string"),
    ("bool for a number", _doc(_set(T2 + ["reference"], False)), "transforms[2].options.reference",
     "must be a string or a number or null, got true/false"),
    ("list for a number", _doc(_set(T2 + ["reference"], [3])), "transforms[2].options.reference", "got a list"),
    ("option pairing", _doc(_set(T2 + ["rule"], "first")), "transforms[2].options.reference",
     "reference= is used only"),
    ("output made twice", _doc(_set(["transforms", 2], {"type": "lag", "options": {"col": "sbp"}})), "transforms[2]",
     "'sbp_lag1' of transform #3 \\(lag\\) is also made by transform #1"),
    ("uses a later column", _doc(_set(T0 + ["col"], "sbp_within")), "transforms[0]",
     "column 'sbp_within' needed by transform #1 \\(lag\\) is made by a later transform \\(#2, within_between\\)"),
    ("uses the id column", _doc(_set(T0 + ["col"], "pid")), "transforms[0]", "uses the id column 'pid'"),
]


@pytest.mark.parametrize(("label", "text", "path", "words"), MALFORMED, ids=[m[0] for m in MALFORMED])
def test_malformed_files(label, text, path, words):
    with pytest.raises(DerivationFileError, match=words) as err:
        Derivation.from_json(text)
    assert err.value.path == path
    if path:
        assert str(err.value).startswith(f"{path}: ")
    assert isinstance(err.value, pfx.OptionError) and isinstance(err.value, ValueError)


def test_the_good_file_reads():
    """The matrix above changes one thing each in a file that is fine as it is."""
    assert Derivation.from_json(_TEXT).to_dict() == _GOOD


def test_bytes_and_encoding():
    assert Derivation.from_json(_TEXT.encode("utf-8")).to_dict() == _GOOD
    with pytest.raises(DerivationFileError, match="not UTF-8"):
        Derivation.from_json(b"\xff\xfe{}")
    # UTF-16 as Windows tools write it: named as such
    with pytest.raises(DerivationFileError, match="UTF-16 byte order mark; save it as UTF-8"):
        Derivation.from_json(_TEXT.encode("utf-16"))
    # a Latin-1 byte in a column name: where it is
    latin = _TEXT.replace('"sbp"', '"sbp\u00e9"', 1).encode("latin-1")
    at = latin.index(b"\xe9")
    with pytest.raises(DerivationFileError, match=f"not UTF-8 text \\(invalid continuation byte at byte {at}, "
                                                  "line \\d+\\); save it as UTF-8"):
        Derivation.from_json(latin)


def test_byte_order_mark_is_ignored(tmp_path):
    """RFC 8259 section 8.1 lets a parser ignore a UTF-8 byte order mark, which Windows editors add."""
    (tmp_path / "bom.json").write_bytes(b"\xef\xbb\xbf" + _TEXT.encode("utf-8"))
    assert Derivation.load(tmp_path / "bom.json").to_dict() == _GOOD
    assert Derivation.from_json("\ufeff" + _TEXT).to_dict() == _GOOD


def test_load_error_names_file_and_path(tmp_path):
    (tmp_path / "d.json").write_text(_doc(_set(T0 + ["periods"], "2")), encoding="utf-8")
    with pytest.raises(DerivationFileError) as err:
        Derivation.load(tmp_path / "d.json")
    assert str(err.value).startswith(f"{tmp_path / 'd.json'}: transforms[0].options.periods: must be an integer")
    assert err.value.path == "transforms[0].options.periods"


def test_missing_column_is_reported_when_applied():
    """A transform that refers to a column the data lack: the file reads, apply names the column."""
    import pandas as pd

    d = Derivation.from_json(_doc(_set(T0 + ["col"], "dbp")))
    frame = pd.DataFrame({"pid": [1, 1], "day": [0, 1], "sbp": [1.0, 2.0]})
    with pytest.raises(pfx.MissingColumnError, match="column 'dbp' needed by transform #1 \\(lag\\) is not in the frame"):
        d.apply(frame)


def test_version_1_files_keep_their_columns():
    """A file saved before the default names changed (format version 1) re-runs with the
    columns it gave then: each changed default is pinned as an explicit name, within_between's
    level= is read as between=, and names that did not change stay defaults.  The old names
    below are those version 1 wrote (the previous release's own outputs, kept in this test)."""
    old = [
        ({"type": "change_from_baseline", "options": {"col": "sbp", "kind": "percent"}}, "sbp_pct_change"),
        ({"type": "change_from_previous", "options": {"col": "sbp", "kind": "percent"}}, "sbp_pct_diff"),
        ({"type": "events_so_far", "options": {"col": "fell"}}, "fell_count"),
        ({"type": "time_since", "options": {"col": "fell"}}, "time_since_fell"),
        ({"type": "time_since", "options": {"col": "fell", "which": "first"}}, "time_since_first_fell"),
        ({"type": "carry_forward", "options": {"col": "sbp", "flag": True}}, "sbp_filled"),
        ({"type": "rolling", "options": {"col": "sbp", "span": "30D"}}, "sbp_mean_30D"),
        ({"type": "rolling", "options": {"col": "sbp", "stat": "max", "span": 2.5}}, "sbp_max_2.5"),
        ({"type": "lag", "options": {"col": "sbp", "offset": 7, "name": None}}, "sbp_lag_7"),
        ({"type": "lag", "options": {"col": "sbp", "offset": "14D"}}, "sbp_lag_14D"),
        ({"type": "lag", "options": {"col": "sbp"}}, "sbp_lag1"),
        ({"type": "within_between", "options": {"col": "sbp", "level": "baseline"}}, "sbp_between"),
    ]
    text = json.dumps({"format": FORMAT, "version": 1, "panel": {"id": "pid", "time": "day"},
                       "transforms": [entry for entry, _ in old]})
    d = Derivation.from_json(text)
    assert [tr.outputs()[0] for tr in d.transforms] == [name for _, name in old]
    assert d.transforms[5].outputs() == ("sbp_filled", "sbp_filled_flag")
    assert d.transforms[-1] == pfx.within_between("sbp", "baseline")
    assert d.transforms[-2] == pfx.lag("sbp")  # unchanged default: no name pinned
    assert json.loads(d.to_json())["version"] == VERSION == 2  # saved again as version 2
