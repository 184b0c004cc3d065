"""Side tables through the whole library: one derive with labs, doses and events; saved
derivations (plain JSON with table names only), the data dictionary, the command line."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx import cli

VISITS = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 14, 0], "sbp": [150.0, 142.0, 138.0]})
LABS = pd.DataFrame({"pid": [1, 1, 2], "drawn": [-2, 13, 1], "alt": [30.0, 41.0, 25.0]})
EX = pd.DataFrame({"pid": [1], "start": [1], "end": [10], "mg": [5.0]})
AE = pd.DataFrame({"pid": [1, 1], "onset": [3, 12]})
TABLES = {"labs": LABS, "ex": EX, "ae": AE}


def derivation() -> pfx.Derivation:
    return pfx.Derivation(
        pfx.baseline("sbp"),
        pfx.as_of("labs", "alt", time="drawn", within=7, keep=("value", "age")),
        pfx.exposure("ex", dose="mg", start="start", end="end"),
        pfx.table_window("ae", time="onset", span=14),
        id="pid", time="day", description="Invented cohort")


def test_one_derive_attaches_labs_doses_and_events():
    out = derivation().apply(VISITS, TABLES)
    assert out["alt_asof"].tolist()[0] == 30.0 and out["alt_asof"].tolist()[1] == 41.0
    assert np.isnan(out["alt_asof"].tolist()[2])  # subject 2's result comes after day 0
    assert out["mg_cumulative"].tolist() == [0.0, 50.0, 0.0]
    assert out["ae_count_14"].tolist() == [0, 2, 0]


def test_saved_derivation_stores_names_not_data():
    d = derivation()
    doc = json.loads(d.to_json())
    text = json.dumps(doc)
    assert "30.0" not in text and '"labs"' in text  # table names and columns, never values
    again = pfx.Derivation.from_json(d.to_json())
    assert again == d and again.tables() == ("labs", "ex", "ae")
    pd.testing.assert_frame_equal(again.apply(VISITS, TABLES), d.apply(VISITS, TABLES))
    with pytest.raises(pfx.MissingTableError, match="'ex', which was not given"):
        again.apply(VISITS, {"labs": LABS})


def test_dictionary_names_side_sources():
    table = derivation().dictionary()
    sources = dict(zip(table["column"], table["sources"]))
    assert sources["alt_asof"] == "labs.alt, labs.drawn"
    assert sources["mg_cumulative"] == "ex.mg, ex.start, ex.end"
    assert sources["ae_count_14"] == "ae.onset"
    full = derivation().dictionary(VISITS, TABLES)
    assert full.set_index("column").loc["mg_cumulative", "dtype"] == "float64"


def test_names_are_checked_before_any_work():
    """A missing table or column is found by plan(), before the panel is ordered."""
    with pytest.raises(pfx.MissingColumnError, match="'mg' needed by transform #3"):
        derivation().apply(VISITS, {**TABLES, "ex": EX.drop(columns="mg")})
    with pytest.raises(pfx.OptionError, match="uses the id column 'pid' of side table"):
        pfx.derive(VISITS, pfx.as_of("labs", "alt", time="pid"), id="pid", time="day", tables=TABLES)


def test_command_line_with_tables(tmp_path, capsys):
    d = derivation()
    d.save(tmp_path / "d.json")
    VISITS.to_csv(tmp_path / "visits.csv", index=False)
    for name, frame in TABLES.items():
        frame.to_parquet(tmp_path / f"{name}.parquet")
    args = [str(tmp_path / "d.json"), str(tmp_path / "visits.csv"), "-o", str(tmp_path / "out.parquet"), "-q"]
    tables = [f"--table={n}={tmp_path / n}.parquet" for n in TABLES]
    assert cli.COMMANDS["apply"]([*args, *tables]) == 0
    got = pd.read_parquet(tmp_path / "out.parquet")
    pd.testing.assert_frame_equal(got, d.apply(VISITS, TABLES), check_dtype=False)
    assert cli.COMMANDS["apply"](args) == 2
    assert "reads side table(s) labs, ex, ae: give --table labs=PATH" in capsys.readouterr().err
    assert cli.COMMANDS["apply"]([*args, *tables, "--table", "other=x.csv"]) == 2
    assert "reads no table of that name" in capsys.readouterr().err
    assert cli.COMMANDS["dictionary"]([str(tmp_path / "d.json"), "--csv"]) == 0
    assert "labs.alt" in capsys.readouterr().out


def test_accessor_passes_tables():
    d = derivation()
    pd.testing.assert_frame_equal(VISITS.pfx.apply(d, TABLES), d.apply(VISITS, TABLES))
    pd.testing.assert_frame_equal(VISITS.pfx.derive(*d.transforms, id="pid", time="day", tables=TABLES),
                                  pfx.derive(VISITS, *d.transforms, id="pid", time="day", tables=TABLES))
