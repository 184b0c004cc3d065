"""Large saved derivations load in time linear in their size.

The files are generated here from the catalogue of every transform type (renamed so that
20,000 of them can share one derivation); no timing assertion: the work is counted in
Python function calls, which must about double when the file doubles.
"""

from __future__ import annotations

import sys

import pytest
from catalogue import ENTRIES, renamed

from panelfx import Derivation


def _many(n: int) -> Derivation:
    """n transforms cycling through every catalogue entry, outputs renamed to be unique."""
    base = [entry.build(True) for _, entry in ENTRIES]
    return Derivation(*(renamed(base[i % len(base)], i) for i in range(n)), id="id", time="t")


def _calls(work) -> int:
    """Python and builtin function calls made by ``work()`` (a count of work, not of time)."""
    count = 0

    def profile(frame, event, arg):
        nonlocal count
        if event in ("call", "c_call"):
            count += 1

    sys.setprofile(profile)
    try:
        work()
    finally:
        sys.setprofile(None)
    return count


def test_twenty_thousand_transforms_load():
    """A 20,000-transform file (as saved) loads and equals what was saved."""
    d = _many(20_000)
    text = d.to_json()
    assert Derivation.from_json(text) == d
    assert len(Derivation.from_json(text).outputs()) >= 20_000


@pytest.mark.parametrize("step", ["load", "build"])
def test_work_is_linear_in_the_number_of_transforms(step):
    """Twice the transforms cost about twice the work (it was quadratic: the check that an input is
    not made by a later transform rescanned the rest of the list for every input read from the frame)."""
    small, large = _many(1_000), _many(2_000)
    if step == "load":
        texts = small.to_json(), large.to_json()
        Derivation.from_json(texts[0])  # warm caches (annotations resolved once per class)
        a, b = (_calls(lambda t=t: Derivation.from_json(t)) for t in texts)
    else:
        a, b = (_calls(lambda d=d: Derivation(*d.transforms, id="id", time="t")) for d in (small, large))
    assert 1.8 < b / a < 2.3, (a, b)


# ------------------------------------------------------------------------------ labels and notes

import json  # noqa: E402

import pandas as pd  # noqa: E402

import panelfx as pfx  # noqa: E402
from panelfx.derivation import DerivationFileError  # noqa: E402

LABELLED = pfx.Derivation(pfx.baseline("sbp"), pfx.lag("sbp"), pfx.within_between("sbp"), id="pid", time="day") \
    .described("sbp_lag1", label="Systolic BP at previous visit", note="Invented example: the visit before.") \
    .described("sbp_within", label="SBP minus subject mean")


def test_labels_and_notes_in_the_dictionary_and_round_trips(tmp_path):
    table = LABELLED.dictionary().set_index("column")
    assert table.loc["sbp_lag1", "label"] == "Systolic BP at previous visit"
    assert table.loc["sbp_lag1", "note"] == "Invented example: the visit before."
    # a label belongs to the transform: every output of within_between shows it
    assert table.loc[["sbp_between", "sbp_within"], "label"].tolist() == ["SBP minus subject mean"] * 2
    assert table.loc["sbp_baseline", ["label", "note"]].tolist() == ["", ""]
    doc = LABELLED.to_dict()
    assert doc["transforms"][1]["label"] == "Systolic BP at previous visit"
    assert "label" not in doc["transforms"][0] and "note" not in doc["transforms"][2]  # only when set
    assert pfx.Derivation.from_json(LABELLED.to_json()) == LABELLED
    LABELLED.save(tmp_path / "d.json")
    assert pfx.Derivation.load(tmp_path / "d.json").dictionary().equals(LABELLED.dictionary())
    frame = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 7, 0], "sbp": [140.0, 135.0, 150.0]})
    record = LABELLED.apply(frame).attrs["panelfx"]
    assert record["dictionary"][1]["label"] == "Systolic BP at previous visit"


def test_labels_change_equality_and_survive_extend():
    plain = pfx.Derivation(pfx.baseline("sbp"), pfx.lag("sbp"), pfx.within_between("sbp"), id="pid", time="day")
    assert LABELLED != plain and hash(LABELLED) != hash(plain)
    # "" removes; removing every label and note gives back the plain derivation
    cleared = LABELLED.described("sbp_lag1", label="", note="").described("sbp_between", label="")
    assert cleared == plain
    # None leaves a value as it is
    assert LABELLED.described("sbp_lag1", note="other").dictionary()["label"].tolist() == \
        LABELLED.dictionary()["label"].tolist()
    more = LABELLED.extend(pfx.lag("sbp_within"))
    assert more.labels == (*LABELLED.labels, "") and more.notes == (*LABELLED.notes, "")
    other = pfx.Derivation(pfx.lag("sbp_baseline"), id="pid", time="day").described("sbp_baseline_lag1", note="n")
    both = LABELLED.extend(other)
    assert both.notes == (*LABELLED.notes, "n")


@pytest.mark.parametrize(("kwargs", "match"), [
    ({"label": "x" * 41}, "label must be at most 40 characters .* got 41"),
    ({"label": "two\nlines"}, "label must be one line"),
    ({"label": 5}, "label must be a string, got an integer"),
    ({"note": ["a"]}, "note must be a string, got a list"),
])
def test_bad_labels(kwargs, match):
    with pytest.raises(pfx.OptionError, match=match):
        LABELLED.described("sbp_lag1", **kwargs)


def test_label_of_a_column_not_made():
    with pytest.raises(pfx.OptionError, match="column 'dbp' is not made by this derivation \\(it makes: sbp_baseline"):
        LABELLED.described("dbp", label="x")


@pytest.mark.parametrize(("value", "key", "match"), [
    ("x" * 41, "label", "at most 40 characters"),
    (["a"], "label", "label must be a string, got a list"),
    (7, "note", "note must be a string, got an integer"),
])
def test_bad_labels_in_files(value, key, match):
    doc = LABELLED.to_dict()
    doc["transforms"][2][key] = value
    with pytest.raises(DerivationFileError, match=match) as err:
        pfx.Derivation.from_dict(doc)
    assert err.value.path == f"transforms[2].{key}"


# ------------------------------------------------------------------------------ JSON Schema

from panelfx._derivation_schema import SCHEMA_FILE, derivation_schema, schema_text  # noqa: E402


def test_shipped_schema_is_generated_from_the_registry():
    """The published file is what the registry gives now (regenerate: python -m panelfx._derivation_schema)."""
    import importlib.resources

    shipped = importlib.resources.files("panelfx").joinpath("derivation.schema.json").read_text(encoding="utf-8")
    assert shipped == schema_text(), "derivation.schema.json is stale: run python -m panelfx._derivation_schema"
    assert json.loads(shipped) == derivation_schema()
    assert pfx.Derivation.json_schema() == derivation_schema()
    assert SCHEMA_FILE.endswith("derivation.schema.json")


def _validator():
    jsonschema = pytest.importorskip("jsonschema")
    schema = derivation_schema()
    jsonschema.Draft202012Validator.check_schema(schema)  # a valid draft 2020-12 schema (the jsonschema package)
    return jsonschema.Draft202012Validator(schema)


def test_saved_files_validate_against_the_schema():
    """Files panelfx saves are valid for the jsonschema package: every catalogue entry of every
    transform type, with labels and notes, and a panel with every key."""
    validator = _validator()
    for numeric in (True, False):
        d = _many(len(ENTRIES)) if numeric else pfx.Derivation(*(e.build(False) for _, e in ENTRIES[:1]),
                                                              id=["site", "id"], time="t", unit="h",
                                                              order="seq", time_unit="D")
        errors = list(validator.iter_errors(d.to_dict()))
        assert not errors, errors[0]
    assert not list(validator.iter_errors(LABELLED.to_dict()))


def _changed(path, value):
    doc = json.loads(LABELLED.to_json())
    target = doc
    for key in path[:-1]:
        target = target[key]
    if value is KeyError:
        del target[path[-1]]
    else:
        target[path[-1]] = value
    return doc


# Malformed files the schema can see (by key and type): the jsonschema package refuses each, and so does panelfx.
SCHEMA_REFUSES = [
    (["format"], "other", "format"),
    (["version"], 3, "version"),
    (["version"], KeyError, "version"),
    (["panel", "unit"], "days", "panel.unit"),
    (["panel", "id"], [], "panel.id"),
    (["panel", "extra"], 1, "panel.extra"),
    (["transforms", 1, "type"], "os.system", "transforms[1].type"),
    (["transforms", 1, "options", "periods"], "2", "transforms[1].options.periods"),
    (["transforms", 1, "options", "periods"], True, "transforms[1].options.periods"),
    (["transforms", 1, "options", "col"], ["sbp"], "transforms[1].options.col"),
    (["transforms", 1, "options", "col"], {"a": 1}, "transforms[1].options.col"),
    (["transforms", 1, "options", "perods"], 2, "transforms[1].options.perods"),
    (["transforms", 1, "options", "col"], KeyError, "transforms[1].options.col"),
    (["transforms", 1, "label"], "x" * 41, "transforms[1].label"),
    (["transforms", 1, "note"], 3, "transforms[1].note"),
    (["transforms", 1, "params"], {}, "transforms[1].params"),
]


@pytest.mark.parametrize(("path", "value", "where"), SCHEMA_REFUSES, ids=[w for _, _, w in SCHEMA_REFUSES])
def test_malformed_files_fail_the_schema(path, value, where):
    validator = _validator()
    doc = _changed(path, value)
    assert list(validator.iter_errors(doc)), f"the schema accepts {where} = {value!r}"
    with pytest.raises(DerivationFileError) as err:
        pfx.Derivation.from_dict(doc)
    assert err.value.path == where
