"""The command line reads the formats trade data arrive in, and dates written as text.

The invented demo cohort (``panelfx.demo.cohort()``) is written by other tools (pyreadstat
``write_dta`` / ``write_xport`` / ``write_sav``, pyarrow for Parquet datasets and
Feather) and read back by ``panelfx apply``: the derived columns must equal those of
``Derivation.apply`` on the frame in memory.  Dates given as text are checked against
``pandas.to_datetime`` with the same format and against Python's ``datetime.strptime``.
"""

from __future__ import annotations

import datetime as dt
import os
import subprocess
import sys

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import panelfx as pfx
from panelfx import cli
from panelfx.__main__ import main
from panelfx.demo import cohort

DERIVATION = pfx.Derivation(pfx.baseline("sbp"), pfx.change_from_baseline("sbp"), pfx.lag("sbp"),
                            pfx.rolling("dose_mg", "mean", occasions=3, name="dose_mean_3"),
                            id=["site", "subject"], time="day", description="invented demo cohort")
KEYS = ["site", "subject", "day", "sbp", "dose_mg"]


def _demo() -> pd.DataFrame:
    """The demo cohort, 40 subjects, with the bool column as 0/1 (SAS transport has no booleans)."""
    return cohort(40).assign(dizzy=lambda d: d["dizzy"].astype("int8"))


def _expected(frame: pd.DataFrame) -> pd.DataFrame:
    return DERIVATION.apply(frame)[[*KEYS, *DERIVATION.outputs()]]


def _same(got: pd.DataFrame, frame: pd.DataFrame) -> None:
    """Equal derived values, row for row after sorting by subject and time (dtypes may differ by
    format: .dta has no int64, .sav and SAS files hold only doubles)."""
    def norm(f: pd.DataFrame) -> pd.DataFrame:
        f = f[[*KEYS, *DERIVATION.outputs()]].astype({"site": str, "subject": "int64", "day": "int64"})
        return f.sort_values(["site", "subject", "day"]).reset_index(drop=True)

    pd.testing.assert_frame_equal(norm(got), norm(_expected(frame)), check_dtype=False)


def _write(kind: str, frame: pd.DataFrame, folder) -> str:
    """``frame`` written by another tool in format ``kind``; returns the file name."""
    if kind == "dta":
        pyreadstat = pytest.importorskip("pyreadstat")
        pyreadstat.write_dta(frame, str(folder / "demo.dta"))
        return "demo.dta"
    if kind in ("sav", "zsav"):
        pyreadstat = pytest.importorskip("pyreadstat")
        pyreadstat.write_sav(frame, str(folder / f"demo.{kind}"), compress=kind == "zsav")
        return f"demo.{kind}"
    if kind == "xpt":
        pyreadstat = pytest.importorskip("pyreadstat")
        # SAS transport version 5 (what pandas reads): names of at most 8 characters
        short = frame.rename(columns={"visit_date": "vdate", "treat_start": "tstart"})
        pyreadstat.write_xport(short, str(folder / "demo.xpt"), file_format_version=5)
        return "demo.xpt"
    if kind == "parquet":
        frame.to_parquet(folder / "demo.parquet")
        return "demo.parquet"
    if kind == "feather":
        import pyarrow.feather as feather

        feather.write_feather(pa.Table.from_pandas(frame, preserve_index=False), folder / "demo.arrow")
        return "demo.arrow"
    raise AssertionError(kind)


FORMATS = ["dta", "sav", "zsav", "xpt", "parquet", "feather"]


@pytest.mark.parametrize("kind", FORMATS)
def test_each_format_round_trips(kind, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    frame = _demo()
    name = _write(kind, frame, tmp_path)
    DERIVATION.save("d.json")
    assert main(["apply", "d.json", name, "-o", "out.parquet", "-q"]) == 0, capsys.readouterr().err
    _same(pd.read_parquet("out.parquet"), frame)
    # and read_frame gives the whole frame whatever the format
    read = cli.read_frame(name)
    assert len(read) == len(frame)


def test_format_override_and_unknown_extension(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    frame = _demo()
    _write("dta", frame, tmp_path)
    os.rename("demo.dta", "demo.data")
    DERIVATION.save("d.json")
    assert main(["apply", "d.json", "demo.data", "-o", "out.csv", "-q"]) == 2
    assert "cannot tell the format of input 'demo.data' from its extension" in capsys.readouterr().err
    assert main(["apply", "d.json", "demo.data", "--input-format", "dta", "-o", "out.parquet", "-q"]) == 0
    _same(pd.read_parquet("out.parquet"), frame)
    assert main(["apply", "d.json", "demo.data", "--input-format", "dta", "-o", "out.dta", "-q"]) == 2
    assert "panelfx writes .csv or .parquet" in capsys.readouterr().err


def test_sas_transport_dates_as_pyreadstat_reads_them(tmp_path):
    """SAS dates in a transport file (numbers with a DATETIME format) become datetimes, as
    pyreadstat (an independent reader of the same file) and the original frame have them."""
    pyreadstat = pytest.importorskip("pyreadstat")
    frame = _demo()
    _write("xpt", frame, tmp_path)
    got = cli.read_frame(str(tmp_path / "demo.xpt"))
    theirs, _ = pyreadstat.read_xport(str(tmp_path / "demo.xpt"))
    for col in ("vdate", "tstart"):
        assert pd.api.types.is_datetime64_any_dtype(got[col])
        assert (got[col].to_numpy() == theirs[col].to_numpy()).all()
    assert (got["vdate"].to_numpy() == frame["visit_date"].to_numpy()).all()
    assert got["site"].tolist() == frame["site"].tolist()  # text decoded, not bytes


def test_parquet_folder_with_hive_partitions(tmp_path, monkeypatch, capsys):
    """A partitioned dataset written by pyarrow (site=.../part.parquet) reads as one frame, the
    partition key as a column; check and dictionary read it in memory (apply takes the
    partitioned path for folders, tested in test_cli_partitioned)."""
    monkeypatch.chdir(tmp_path)
    frame = _demo()
    pq.write_to_dataset(pa.Table.from_pandas(frame, preserve_index=False), "cohort", partition_cols=["site"])
    assert sorted(os.listdir("cohort"))[0].startswith("site=")
    read = cli.read_frame("cohort")
    assert sorted(read.columns) == sorted(frame.columns)
    _same(DERIVATION.apply(read), frame)
    assert main(["check", "cohort", "--id", "site", "--id", "subject", "--time", "day", "-q"]) == 0
    assert capsys.readouterr().out == f"no structural problems found in cohort ({len(frame)} rows)\n"
    DERIVATION.save("d.json")
    assert main(["apply", "d.json", "cohort", "-o", "out", "-q"]) == 0
    got = pq.read_table("out").to_pandas()
    _same(got, frame)


def test_subprocess_reads_dta_and_sas_files(tmp_path):
    """The real entry point on files written by other tools."""
    frame = _demo()
    DERIVATION.save(tmp_path / "d.json")
    for kind in ("dta", "xpt"):
        name = _write(kind, frame, tmp_path)
        run = subprocess.run([sys.executable, "-m", "panelfx", "apply", "d.json", name, "-o", f"{kind}.parquet"],
                             cwd=tmp_path, capture_output=True, text=True, timeout=120)
        assert run.returncode == 0, run.stderr
        assert f"read {len(frame):,} rows" in run.stderr
        _same(pd.read_parquet(tmp_path / f"{kind}.parquet"), frame)


def test_missing_optional_reader_names_the_extra(tmp_path, monkeypatch, capsys):
    import builtins

    real = builtins.__import__

    def no_pyreadstat(name, *a, **k):
        if name == "pyreadstat":
            raise ImportError("no module named pyreadstat")
        return real(name, *a, **k)

    (tmp_path / "x.sav").write_bytes(b"")
    monkeypatch.setattr(builtins, "__import__", no_pyreadstat)
    with pytest.raises(pfx.MissingDependencyError, match="pip install 'panelfx\\[formats\\]'") as err:
        cli.read_frame(str(tmp_path / "x.sav"))
    assert err.value.extra == "formats" and isinstance(err.value, ImportError)
    monkeypatch.chdir(tmp_path)
    DERIVATION.save("d.json")
    assert main(["apply", "d.json", "x.sav", "-o", "o.csv"]) == 2
    assert "needs pyreadstat" in capsys.readouterr().err


def test_stdin_reads_csv_or_parquet_only(monkeypatch):
    with pytest.raises(cli.UsageError, match="- reads CSV or Parquet from stdin, not dta"):
        cli.read_frame("-", "dta")


# ------------------------------------------------------------------------------ dates as text

DAYS = pd.Series(["01/03/2024", "31/12/2023", "", "7/1/2024", "29/02/2024"])


def _strptime(values, fmt):
    """Python's own strptime, one value at a time: a reference independent of pandas' parser."""
    return [pd.NaT if not v else pd.Timestamp(dt.datetime.strptime(v, fmt)) for v in values]


def test_date_format_as_pandas_and_strptime(tmp_path):
    frame = pd.DataFrame({"pid": [1, 1, 2, 2, 3], "visit": DAYS, "sbp": [1.0, 2, 3, 4, 5]})
    frame.to_csv(tmp_path / "v.csv", index=False)
    got = cli.read_frame(str(tmp_path / "v.csv"), dates=["visit"], date_format="%d/%m/%Y")
    ours = got["visit"]
    pandas = pd.to_datetime(DAYS.replace("", None), format="%d/%m/%Y")  # pandas.to_datetime, same format
    assert (ours.isna() == pandas.isna()).all() and (ours.dropna() == pandas.dropna()).all()
    assert ours.tolist() == _strptime(DAYS, "%d/%m/%Y")
    # --day-first without a layout: pandas' guess from the first value, day first
    first = cli.read_frame(str(tmp_path / "v.csv"), dates=["visit"], day_first=True)["visit"]
    assert first.equals(ours)
    assert (first.dropna() == pd.to_datetime(DAYS.replace("", None), dayfirst=True).dropna()).all()


def test_date_format_with_time_and_month_names(tmp_path):
    values = pd.Series(["05MAR2024 08:30", "17jan2024 23:05"])
    pd.DataFrame({"pid": [1, 2], "t": values}).to_csv(tmp_path / "v.csv", index=False)
    got = cli.read_frame(str(tmp_path / "v.csv"), dates=["t"], date_format="%d%b%Y %H:%M")["t"]
    assert got.tolist() == _strptime(values, "%d%b%Y %H:%M")
    assert got.tolist() == pd.to_datetime(values, format="%d%b%Y %H:%M").tolist()


def test_text_dates_without_an_option_say_which_to_give(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    pd.DataFrame({"pid": [1, 1, 2], "visit": ["01/03/2024", "31/03/2024", "02/03/2024"],
                  "sbp": [1.0, 2, 3]}).to_csv("v.csv", index=False)
    pfx.Derivation(pfx.lag("sbp"), id="pid", time="visit").save("d.json")
    assert main(["apply", "d.json", "v.csv", "-o", "o.csv"]) == 2
    line = capsys.readouterr().err.strip()
    assert line == ("panelfx apply: error: column 'visit' of v.csv holds text, not dates or numbers (first values: "
                    "'01/03/2024', '31/03/2024', '02/03/2024'): give its layout with --date-format, e.g. "
                    "--date-format '%d/%m/%Y', or --day-first for day/month/year dates")
    with pytest.raises(pfx.TimeTypeError) as err:
        cli.read_frame("v.csv", dates=["visit"], ids=["pid"])
    assert (err.value.column, err.value.count, err.value.ids) == ("visit", 3, [1, 2])
    for option in (["--date-format", "%d/%m/%Y"], ["--day-first"]):
        assert main(["apply", "d.json", "v.csv", "-o", "o.csv", "-q", *option]) == 0
        out = cli.read_frame("o.csv")
        assert out["visit"].tolist() == _strptime(["01/03/2024", "31/03/2024", "02/03/2024"], "%d/%m/%Y")
        assert out["sbp_lag1"].tolist()[1] == 1.0
    assert main(["check", "v.csv", "--id", "pid", "--time", "visit", "--day-first", "-q"]) == 0
    assert main(["apply", "d.json", "v.csv", "-o", "o.csv", "--day-first", "--date-format", "%d/%m/%Y"]) == 2
    assert "not both" in capsys.readouterr().err


def test_dates_that_do_not_fit(tmp_path):
    """31/02 is no date: pandas refuses it (pyarrow's strptime would roll it over to 2 March)."""
    frame = pd.DataFrame({"pid": [1, 1, 2, 3], "visit": ["01/03/2024", "31/02/2024", "2024-03-05", "02/03/2024"]})
    frame.to_csv(tmp_path / "v.csv", index=False)
    with pytest.raises(ValueError):
        pd.to_datetime(frame["visit"], format="%d/%m/%Y")  # the reference refuses them too
    with pytest.raises(pfx.TimeTypeError, match="2 value\\(s\\) do not fit --date-format '%d/%m/%Y'; rows "
                                                "1 \\('31/02/2024'\\), 2 \\('2024-03-05'\\)") as err:
        cli.read_frame(str(tmp_path / "v.csv"), dates=["visit"], date_format="%d/%m/%Y", ids=["pid"])
    assert (err.value.count, err.value.ids) == (2, [1, 2])
    with pytest.raises(pfx.TimeTypeError, match="do not fit --day-first \\(layout '%d/%m/%Y'\\)"):
        cli.read_frame(str(tmp_path / "v.csv"), dates=["visit"], day_first=True)


def test_other_date_columns_and_side_tables(tmp_path, monkeypatch, capsys):
    """--date names more text date columns; side tables' time columns are parsed too."""
    monkeypatch.chdir(tmp_path)
    visits = pd.DataFrame({"pid": [1, 1, 2], "day": ["01.03.2024", "15.03.2024", "02.03.2024"],
                           "start": ["01.02.2024", "01.02.2024", "10.02.2024"], "sbp": [1.0, 2, 3]})
    visits.to_csv("v.csv", index=False)
    labs = pd.DataFrame({"pid": [1, 2], "drawn": ["28.02.2024", "01.03.2024"], "alt": [30.0, 40.0]})
    labs.to_csv("labs.csv", index=False)
    d = pfx.Derivation(pfx.as_of("labs", "alt", time="drawn"), pfx.lag("start"), id="pid", time="day")
    d.save("d.json")
    assert main(["apply", "d.json", "v.csv", "--table", "labs=labs.csv", "-o", "o.parquet", "-q",
                 "--date-format", "%d.%m.%Y", "--date", "start"]) == 0, capsys.readouterr().err
    out = pd.read_parquet("o.parquet")
    assert pd.api.types.is_datetime64_any_dtype(out["start"])
    assert out["alt_asof"].tolist() == [30.0, 30.0, 40.0]


def test_partitioned_apply_refuses_date_options(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    _demo().to_parquet("demo.parquet")
    DERIVATION.save("d.json")
    assert main(["apply", "d.json", "demo.parquet", "-o", "out", "--partitions", "2", "--day-first"]) == 2
    assert "partitioned apply reads Parquet" in capsys.readouterr().err


def test_encoding_of_csv(tmp_path):
    frame = pd.DataFrame({"pid": ["Zoë", "Zoë", "Ana"], "day": [0, 7, 0], "sbp": [1.0, 2.0, np.nan]})
    (tmp_path / "v.csv").write_bytes(frame.to_csv(index=False).encode("latin-1"))
    got = cli.read_frame(str(tmp_path / "v.csv"), encoding="latin-1")
    assert got["pid"].tolist() == ["Zoë", "Zoë", "Ana"]


# ------------------------------------------------------------------------------ data dictionary beside CSV


@pytest.fixture
def run_dir(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    frame = cohort(10)
    frame.to_csv("visits.csv", index=False)
    DERIVATION.described("sbp_lag1", label="SBP at the previous visit").save("d.json")
    return tmp_path


def test_dictionary_beside_csv_output(run_dir, capsys):
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv"]) == 0
    assert capsys.readouterr().err.splitlines()[-1] == \
        f"panelfx apply: wrote the data dictionary ({len(DERIVATION.outputs())} columns) to out.dictionary.csv"
    side = pd.read_csv("out.dictionary.csv", keep_default_na=False)
    expected = pfx.Derivation.load("d.json").dictionary(cli.read_frame("visits.csv"))
    assert side["column"].tolist() == list(DERIVATION.outputs())
    assert side["label"].tolist() == [""] * 2 + ["SBP at the previous visit", ""]
    assert side["dtype"].tolist() == expected["dtype"].tolist()
    assert side.columns.tolist() == expected.columns.tolist()
    # a second run replaces its own dictionary; a compressed output's stem; Parquet and stdout: none
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv", "-q"]) == 0
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv.gz", "-q"]) == 0
    assert os.path.exists("out.dictionary.csv")
    assert main(["apply", "d.json", "visits.csv", "-o", "out.parquet", "-q"]) == 0
    assert main(["apply", "d.json", "visits.csv", "-o", "plain.csv", "-q", "--no-dictionary"]) == 0
    assert main(["apply", "d.json", "visits.csv", "-o", "named.parquet", "-q", "--dictionary", "dd.csv"]) == 0
    assert sorted(p for p in os.listdir(".") if "dictionary" in p or p == "dd.csv") == \
        ["dd.csv", "out.dictionary.csv"]
    assert pd.read_csv("dd.csv")["column"].tolist() == list(DERIVATION.outputs())


def test_dictionary_never_overwrites_another_file(run_dir, capsys):
    (run_dir / "out.dictionary.csv").write_text("my notes\n")
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv"]) == 2
    assert capsys.readouterr().err.strip() == (
        "panelfx apply: error: out.dictionary.csv exists and is not a data dictionary written by panelfx apply: "
        "refusing to overwrite it; remove it, or give --dictionary PATH or --no-dictionary")
    assert (run_dir / "out.dictionary.csv").read_text() == "my notes\n"
    assert not os.path.exists("out.csv")  # refused before any work
    # nor an input, however named
    assert main(["apply", "d.json", "visits.csv", "-o", "o.csv", "--dictionary", "./visits.csv"]) == 2
    assert "--dictionary ./visits.csv is the input file visits.csv: refusing to overwrite it" in \
        capsys.readouterr().err
    assert main(["apply", "d.json", "visits.csv", "-o", "o.csv", "--dictionary", "o.csv"]) == 2
    assert "is the output file" in capsys.readouterr().err


def test_failed_output_leaves_the_dictionary_as_it_was(run_dir, capsys, monkeypatch):
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv", "-q"]) == 0
    before = (run_dir / "out.dictionary.csv").read_bytes(), (run_dir / "out.csv").read_bytes()
    pfx.Derivation.load("d.json").described("sbp_lag1", label="changed").save("d.json")
    import pyarrow.csv as pc

    class Full(pc.CSVWriter):
        def write_table(self, *a, **k):
            raise OSError(28, "No space left on device")

    monkeypatch.setattr(pc, "CSVWriter", Full)
    names = sorted(os.listdir("."))
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv", "-q"]) == 2
    assert "writing out.csv failed (out.csv was left as it was)" in capsys.readouterr().err
    assert ((run_dir / "out.dictionary.csv").read_bytes(), (run_dir / "out.csv").read_bytes()) == before
    assert sorted(os.listdir(".")) == names  # no temporary file left


def test_sas7bdat_goes_to_pandas_read_sas(tmp_path, monkeypatch):
    """No tool at hand writes SAS7BDAT files, so this checks the route only: pandas.read_sas with the
    format named and the encoding the file records ("infer"), or the one given."""
    calls = []

    def read_sas(path, **kw):
        calls.append((os.path.basename(path), kw))
        return _demo()

    monkeypatch.setattr(pd, "read_sas", read_sas)
    (tmp_path / "adsl.sas7bdat").write_bytes(b"")
    frame = cli.read_frame(str(tmp_path / "adsl.sas7bdat"), columns=KEYS)
    assert list(frame.columns) == KEYS
    cli.read_frame(str(tmp_path / "adsl.sas7bdat"), encoding="cp1252")
    assert calls == [("adsl.sas7bdat", {"format": "sas7bdat", "encoding": "infer"}),
                     ("adsl.sas7bdat", {"format": "sas7bdat", "encoding": "cp1252"})]
