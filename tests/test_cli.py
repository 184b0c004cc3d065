"""The command line: check / apply / dictionary.

A few tests run the real entry point (``python -m panelfx`` and the ``panelfx`` console
script) in a subprocess on real CSV and Parquet files, including a write that fails half
way; the rest call the same command functions in-process, which is much faster.
All data here are invented.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

import panelfx as pfx
from panelfx import cli
from panelfx.__main__ import main


def _cohort(n_subjects: int = 4, seed: int = 1) -> pd.DataFrame:
    """Invented clinic visits: 3 per subject, 30 days apart, systolic pressure."""
    rng = np.random.default_rng(seed)
    n = 3 * n_subjects
    day = np.tile([0, 30, 60], n_subjects)
    return pd.DataFrame({
        "pid": np.repeat(np.arange(1, n_subjects + 1), 3),
        "day": day,
        "visit": pd.Timestamp("2024-03-01") + pd.to_timedelta(day, unit="D"),
        "sbp": rng.normal(140, 10, n).round(1),
    })


DERIVATION = pfx.Derivation(pfx.baseline("sbp"), pfx.change_from_baseline("sbp"), pfx.lag("sbp_change"),
                           pfx.within_between("sbp"), id="pid", time="day", description="invented example")


def _run(*args: str, console: bool = False, **kw) -> subprocess.CompletedProcess:
    if console:
        exe = shutil.which("panelfx", path=os.path.dirname(sys.executable))
        if exe is None:
            pytest.skip("the panelfx console script is not installed beside this Python")
        command = [exe, *args]
    else:
        command = [sys.executable, "-m", "panelfx", *args]
    env = {**os.environ, "PYTHONDONTWRITEBYTECODE": "1"}
    return subprocess.run(command, capture_output=True, text=True, timeout=120, env=env, **kw)


# ------------------------------------------------------------------------------ subprocesses


def test_saved_by_one_process_applied_by_another(tmp_path):
    """A derivation saved by one process and applied by another (the real entry point, CSV in,
    Parquet out) gives the frame this process gets, with the provenance in the file's metadata."""
    _cohort().to_csv(tmp_path / "visits.csv", index=False)
    save = textwrap.dedent("""
        import sys, panelfx as pfx
        pfx.Derivation(pfx.baseline("sbp"), pfx.change_from_baseline("sbp"), pfx.lag("sbp_change"),
                      pfx.within_between("sbp"), id="pid", time="day", description="invented example").save(sys.argv[1])
    """)
    saved = subprocess.run([sys.executable, "-c", save, str(tmp_path / "d.json")], capture_output=True, text=True,
                           timeout=120)
    assert saved.returncode == 0, saved.stderr
    run = _run("apply", "d.json", "visits.csv", "-o", "out.parquet", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert run.stdout == ""
    assert "wrote 12 rows, 9 columns to out.parquet" in run.stderr

    here = pfx.Derivation.load(tmp_path / "d.json")
    assert here == DERIVATION
    expected = here.apply(cli.read_frame(str(tmp_path / "visits.csv")))
    got = pd.read_parquet(tmp_path / "out.parquet")
    pd.testing.assert_frame_equal(got, expected)

    schema = pq.read_schema(tmp_path / "out.parquet")
    record = json.loads(schema.metadata[b"panelfx"])
    assert pfx.Derivation.from_dict(record["derivation"]) == DERIVATION
    assert [r["column"] for r in record["dictionary"]] == list(DERIVATION.outputs())
    assert record["input"] == "visits.csv"
    field = json.loads(schema.field("sbp_change").metadata[b"panelfx"])
    assert field["transform"] == "change_from_baseline" and field["dtype"] == "float64"
    assert got.pfx.derivation == DERIVATION  # pandas restores attrs from the file too


def test_check_exit_codes(tmp_path):
    """check prints the report and exits 1 on fatal problems, 0 otherwise (Parquet, console script)."""
    bad = _cohort()
    bad.loc[4, "day"] = 0  # a second visit on day 0 for subject 2
    bad.to_csv(tmp_path / "bad.csv", index=False)
    run = _run("check", "bad.csv", "--id", "pid", "--time", "day", "--spacing", "30", cwd=tmp_path)
    assert run.returncode == 1, run.stderr
    assert "duplicate" in run.stdout and "fatal" in run.stdout
    _cohort().to_parquet(tmp_path / "good.parquet")
    run = _run("check", "good.parquet", "--id", "pid", "--time", "visit", "--spacing", "30D", cwd=tmp_path,
               console=True)
    assert run.returncode == 0, run.stderr
    assert run.stdout.startswith("no structural problems found in good.parquet (12 rows)")


@pytest.mark.skipif(not hasattr(os, "fork") or sys.platform == "darwin", reason="needs POSIX file-size limits")
def test_failed_write_leaves_no_partial_output(tmp_path):
    """A write that fails half way (the file-size limit is hit, as on a full disk) leaves the
    earlier good output untouched, no temporary file, one error line and a non-zero exit code."""
    import resource

    big = pd.DataFrame({"pid": np.repeat(np.arange(5000), 6), "day": np.tile(np.arange(6) * 30, 5000),
                        "sbp": np.random.default_rng(0).normal(140, 10, 30000)})
    big.to_parquet(tmp_path / "big.parquet")
    DERIVATION.save(tmp_path / "d.json")
    good = _run("apply", "d.json", "big.parquet", "-o", "out.parquet", "--quiet", cwd=tmp_path)
    assert good.returncode == 0 and good.stderr == ""
    before = (tmp_path / "out.parquet").read_bytes()
    assert len(before) > 400_000  # the limit below is hit part-way through the write

    def limit_file_size():  # runs in the child; Python ignores SIGXFSZ, so writes fail with EFBIG
        resource.setrlimit(resource.RLIMIT_FSIZE, (200_000, 200_000))

    files = sorted(os.listdir(tmp_path))
    run = _run("apply", "d.json", "big.parquet", "-o", "out.parquet", "--quiet", cwd=tmp_path,
               preexec_fn=limit_file_size)
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("panelfx apply: error: writing out.parquet failed "
                                                   "(out.parquet was left as it was)"), run.stderr
    assert "too large" in lines[0].lower()
    assert (tmp_path / "out.parquet").read_bytes() == before
    assert sorted(os.listdir(tmp_path)) == files


def test_dictionary_command_and_usage_error(tmp_path):
    DERIVATION.save(tmp_path / "d.json")
    run = _run("dictionary", "d.json", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert run.stdout.splitlines()[:2] == ["invented example", "panel: id pid; time day"]
    assert "sbp_change_lag1" in run.stdout and "[output 2 of 2]" in run.stdout
    run = _run("apply", "d.json", cwd=tmp_path)
    assert run.returncode == 2 and run.stdout == ""
    assert run.stderr.strip().splitlines() == [
        "panelfx apply: error: the following arguments are required: input, -o/--output "
        "(see 'panelfx apply --help')"]


# ------------------------------------------------------------------------------ in-process


@pytest.fixture
def files(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _cohort().to_csv("visits.csv", index=False)
    _cohort().to_parquet("visits.parquet")
    DERIVATION.save("d.json")
    return tmp_path


def _one_error_line(capsys, command: str) -> str:
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) >= 1 and err[-1].startswith(f"panelfx {command}: error: "), err
    assert all(not line.startswith(f"panelfx {command}: error") for line in err[:-1])
    return err[-1]


def test_apply_formats_agree(files, capsys):
    """CSV or Parquet in, CSV or Parquet out: the same derived values."""
    assert main(["apply", "d.json", "visits.parquet", "-o", "a.parquet", "-q"]) == 0
    assert main(["apply", "d.json", "visits.csv", "-o", "b.csv", "-q"]) == 0
    assert main(["apply", "d.json", "visits.csv", "-o", "c.txt", "--output-format", "parquet", "-q"]) == 0
    assert capsys.readouterr().err == ""
    a = pd.read_parquet("a.parquet")
    b = cli.read_frame("b.csv")
    c = pd.read_parquet("c.txt")
    expected = DERIVATION.apply(_cohort())
    pd.testing.assert_frame_equal(a, expected)
    pd.testing.assert_frame_equal(c.drop(columns="visit"), expected.drop(columns="visit"))
    pd.testing.assert_frame_equal(b.drop(columns="visit"), expected.drop(columns="visit"), check_dtype=False)
    assert (b["visit"] == expected["visit"]).all()


def test_progress_on_stderr(files, capsys, monkeypatch):
    """Large inputs report rows read and written as they go; --quiet silences it."""
    monkeypatch.setattr(cli, "PROGRESS_ROWS", 5)
    monkeypatch.setattr(cli, "BATCH_ROWS", 5)
    assert main(["apply", "d.json", "visits.parquet", "-o", "out.parquet"]) == 0
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err.splitlines() == [
        "panelfx apply: read 5 of 12 rows",
        "panelfx apply: read 10 of 12 rows",
        "panelfx apply: read 12 rows, 4 columns from visits.parquet",
        "panelfx apply: derived 5 column(s): sbp_baseline, sbp_change, sbp_change_lag1, sbp_between, sbp_within",
        "panelfx apply: wrote 5 of 12 rows",
        "panelfx apply: wrote 10 of 12 rows",
        "panelfx apply: wrote 12 rows, 9 columns to out.parquet",
    ]
    assert pq.ParquetFile("out.parquet").metadata.num_rows == 12


def test_progress_reading_csv_counts_bytes(files, capsys, monkeypatch):
    """CSV rows are known only once parsed, so reading reports bytes; compressed CSV reads too."""
    import gzip

    with open("visits.csv", "rb") as src, gzip.open("visits.csv.gz", "wb") as dst:
        dst.write(src.read())
    monkeypatch.setattr(cli, "PROGRESS_BYTES", 64)
    frame = cli.read_frame("visits.csv.gz", progress=cli.Progress("apply", quiet=False))
    pd.testing.assert_frame_equal(frame, cli.read_frame("visits.csv"))
    lines = capsys.readouterr().err.splitlines()
    assert lines[0].startswith("panelfx apply: read 0 of 0 MB of visits.csv.gz")
    assert lines[-1] == "panelfx apply: read 12 rows, 4 columns from visits.csv.gz"


def test_failure_while_writing_in_process(files, capsys, monkeypatch):
    """An error after part of the file is written: the old output stays, no temporary file."""
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv", "-q"]) == 0
    before = (files / "out.csv").read_bytes()
    monkeypatch.setattr(cli, "PROGRESS_ROWS", 4)
    import pyarrow.csv as pc

    calls = []

    class FlakyWriter(pc.CSVWriter):  # the disk fills up on the second slice
        def write_table(self, table, *a, **k):
            calls.append(len(table))
            if len(calls) == 2:
                raise OSError(28, "No space left on device")
            return super().write_table(table, *a, **k)

    monkeypatch.setattr(pc, "CSVWriter", FlakyWriter)
    names = sorted(os.listdir("."))
    assert main(["apply", "d.json", "visits.csv", "-o", "out.csv", "-q"]) == 2
    assert _one_error_line(capsys, "apply") == ("panelfx apply: error: writing out.csv failed (out.csv was left as "
                                                "it was): No space left on device")
    assert calls == [4, 4]
    assert (files / "out.csv").read_bytes() == before
    assert sorted(os.listdir(".")) == names
    calls.clear()
    assert main(["apply", "d.json", "visits.csv", "-o", "new.csv", "-q"]) == 2
    assert "(no new.csv was made)" in _one_error_line(capsys, "apply")
    assert not os.path.exists("new.csv")


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["apply", "missing.json", "visits.csv", "-o", "o.csv"], "No such file or directory: missing.json"),
        (["apply", "d.json", "nope.csv", "-o", "o.csv"], "input file 'nope.csv' does not exist"),
        (["apply", "d.json", "visits.csv", "-o", "o.xlsx"], "cannot tell the format of output 'o.xlsx'"),
        (["apply", "d.json", "visits.csv", "-o", "no/such/dir/o.csv"], "output folder"),
        (["apply", "broken.json", "visits.csv", "-o", "o.csv"],
         "broken.json: transforms[2].options.periods: periods must be a non-zero integer, got 0"),
        (["apply", "dbp.json", "visits.parquet", "-o", "o.csv"], "column 'dbp' is not in visits.parquet"),
        (["apply", "dbp.json", "visits.csv", "-o", "o.csv"], "column 'dbp' needed by transform #1 (lag)"),
        (["apply", "d.json", "dup.csv", "-o", "o.csv"], "duplicate (id, time)"),
        (["check", "visits.csv", "--id", "pid"], "the following arguments are required: --time"),
        (["check", "visits.csv", "--id", "patient", "--time", "day"], "column 'patient' is not in visits.csv"),
        (["check", "visits.csv", "--id", "pid", "--time", "visit", "--spacing", "30"],
         "spacing=30 does not fit time column 'visit'"),
        (["check", "visits.csv", "--id", "pid", "--time", "day", "--tolerance", "3"], "tolerance= needs spacing="),
        (["dictionary", "visits.csv"], "visits.csv: not valid JSON"),
        (["dictionary", "d.json", "--bogus"], "unrecognized arguments: --bogus"),
    ],
)
def test_errors_are_one_line_with_exit_code_2(files, capsys, argv, message):
    (files / "broken.json").write_text(DERIVATION.to_json().replace('"periods": 1', '"periods": 0'))
    pfx.Derivation(pfx.lag("dbp"), id="pid", time="day").save(files / "dbp.json")
    dup = _cohort()
    dup.loc[1, "day"] = 0
    dup.to_csv(files / "dup.csv", index=False)
    assert main(argv) == 2
    line = _one_error_line(capsys, argv[0])
    assert message in line
    assert "Traceback" not in line
    assert not os.path.exists(files / "o.csv")


def test_check_output(files, capsys):
    late = _cohort()
    late.loc[2, "day"] = 75  # 15 days after the third scheduled visit
    late.to_csv("late.csv", index=False)
    assert main(["check", "late.csv", "--id", "pid", "--time", "day", "--spacing", "30", "--tolerance", "5"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("1 finding(s) in late.csv (12 rows): 1 warning\n")
    assert "late" in out and "15.0 after scheduled occasion 2" in out
    assert main(["check", "late.csv", "--id", "pid", "--time", "day", "--spacing", "30", "--csv", "-q"]) == 0
    import io

    report = pd.read_csv(io.StringIO(capsys.readouterr().out))
    assert report[["problem", "severity", "id", "row", "time"]].values.tolist() == [["late", "warning", 1, 2, 75]]


def test_check_several_id_columns_and_text_ids(files, capsys):
    df = _cohort().assign(site=["007"] * 6 + ["7"] * 6, pid=[1, 1, 1, 2, 2, 2] * 2)
    df.to_csv("sites.csv", index=False)
    # Read as numbers, "007" and "7" are the same site, so visits collide.
    assert main(["check", "sites.csv", "--id", "site", "--id", "pid", "--time", "day", "-q"]) == 1
    capsys.readouterr()
    assert main(["check", "sites.csv", "--id", "site", "--id", "pid", "--time", "day", "--text", "site", "-q"]) == 0
    assert capsys.readouterr().out.startswith("no structural problems")


def test_dictionary_with_input_and_csv(files, capsys):
    assert main(["dictionary", "d.json", "visits.parquet", "--csv", "-q"]) == 0
    import io

    table = pd.read_csv(io.StringIO(capsys.readouterr().out))
    expected = DERIVATION.dictionary(_cohort())
    assert table["column"].tolist() == expected["column"].tolist()
    assert table["dtype"].tolist() == ["float64"] * 5
    assert table["time_unit"].isna().all() and (expected["time_unit"] == "").all()  # empty cells read back as NaN


def test_help_and_unknown_command(capsys):
    assert main(["apply", "--help"]) == 0
    assert "saved derivation" in capsys.readouterr().out
    assert main(["frobnicate"]) == 2
    capsys.readouterr()
    assert main([]) == 0 and "dictionary  print the data dictionary" in capsys.readouterr().out
    assert main(["--version"]) == 0 and capsys.readouterr().out.startswith("panelfx ")
    assert set(cli.COMMANDS) == {"check", "apply", "dictionary"}


def test_check_with_an_order_column(files, capsys):
    """Two rows at one time are duplicates, unless --order tells them apart (tied occasions)."""
    df = pd.DataFrame({"pid": [1, 1, 1], "hour": [0, 0, 1], "seq": [2, 1, 1]})
    df.to_csv("tied.csv", index=False)
    assert main(["check", "tied.csv", "--id", "pid", "--time", "hour", "-q"]) == 1
    capsys.readouterr()
    assert main(["check", "tied.csv", "--id", "pid", "--time", "hour", "--order", "seq", "-q"]) == 0
    assert capsys.readouterr().out.startswith("no structural problems")


# ------------------------------------------------------------------------------ faults (issue 17)


def test_output_onto_an_input_is_refused(tmp_path):
    """-o naming the input or the derivation itself (also through a link or another spelling of
    the path) is refused with exit code 2 before anything is read or written: it would destroy
    the data the result comes from."""
    _cohort().to_csv(tmp_path / "visits.csv", index=False)
    DERIVATION.save(tmp_path / "d.json")
    (tmp_path / "sub").mkdir()
    os.link(tmp_path / "visits.csv", tmp_path / "sub" / "hard.csv")
    before = {p: p.read_bytes() for p in (tmp_path / "visits.csv", tmp_path / "d.json")}
    for output, what in [("visits.csv", "input"), ("./sub/../visits.csv", "input"), ("sub/hard.csv", "input"),
                         ("d.json", "derivation")]:
        run = _run("apply", "d.json", "visits.csv", "-o", output, "--output-format", "csv", cwd=tmp_path)
        assert run.returncode == 2, (output, run.stderr)
        assert run.stderr.strip().splitlines() == [
            f"panelfx apply: error: -o {output} is the {what} file "
            f"{'visits.csv' if what == 'input' else 'd.json'}: refusing to overwrite it; "
            "write the result to another file"], run.stderr
        assert {p: p.read_bytes() for p in before} == before
    assert sorted(os.listdir(tmp_path)) == ["d.json", "sub", "visits.csv"]


_SLOW_WRITE = textwrap.dedent("""
    import sys, time
    import pyarrow.parquet as pq
    from panelfx.__main__ import main

    class Slow(pq.ParquetWriter):  # each slice takes a while, so the run is killed half-way
        def write_table(self, table, *a, **k):
            super().write_table(table, *a, **k)
            print("slice", flush=True)
            time.sleep(30)

    pq.ParquetWriter = Slow
    sys.exit(main(sys.argv[1:]))
""")


@pytest.mark.skipif(not hasattr(os, "kill") or sys.platform == "win32", reason="needs POSIX signals")
def test_killed_run_leaves_no_temporary_file(tmp_path):
    """SIGTERM half-way through the write: the temporary file is removed, the earlier output is
    untouched, exit code 143 (128 + SIGTERM). A temporary file left by a run killed outright
    (SIGKILL cannot be caught) is swept by the next run."""
    import signal

    _cohort().to_parquet(tmp_path / "visits.parquet")
    DERIVATION.save(tmp_path / "d.json")
    (tmp_path / "out.parquet").write_bytes(b"earlier output")
    env = {**os.environ, "PYTHONDONTWRITEBYTECODE": "1"}

    def start() -> subprocess.Popen:
        child = subprocess.Popen([sys.executable, "-c", _SLOW_WRITE, "apply", "d.json", "visits.parquet", "-o",
                                  "out.parquet", "-q"], cwd=tmp_path, env=env, stdout=subprocess.PIPE,
                                 stderr=subprocess.PIPE, text=True)
        assert child.stdout is not None and child.stdout.readline() == "slice\n"  # half-way through the write
        assert [n for n in os.listdir(tmp_path) if n.endswith(".panelfx-tmp")]
        return child

    child = start()
    child.send_signal(signal.SIGTERM)
    out, err = child.communicate(timeout=60)
    assert child.returncode == 143, err
    assert err.strip().splitlines() == ["panelfx apply: terminated before the output was complete; "
                                        "nothing was written"]
    assert sorted(os.listdir(tmp_path)) == ["d.json", "out.parquet", "visits.parquet"]
    assert (tmp_path / "out.parquet").read_bytes() == b"earlier output"

    child = start()
    child.kill()  # SIGKILL: the temporary file stays behind ...
    child.communicate(timeout=60)
    left = [n for n in os.listdir(tmp_path) if n.endswith(".panelfx-tmp")]
    assert len(left) == 1 and left[0].startswith(".out.parquet.")
    (tmp_path / ".other.parquet.x.panelfx-tmp").write_bytes(b"")  # another target's: not swept
    run = _run("apply", "d.json", "visits.parquet", "-o", "out.parquet", "-q", cwd=tmp_path)
    assert run.returncode == 0, run.stderr  # ... until the next run sweeps it
    assert sorted(os.listdir(tmp_path)) == [".other.parquet.x.panelfx-tmp", "d.json", "out.parquet",
                                            "visits.parquet"]
    pd.testing.assert_frame_equal(pd.read_parquet(tmp_path / "out.parquet"), DERIVATION.apply(_cohort()))


def _into_closed_pipe(*args: str, cwd, stdin: bytes | None = None) -> subprocess.CompletedProcess:
    """Run the real entry point with stdout a pipe whose reader is already gone (as after
    ``| head`` has read its lines): every write to stdout fails with EPIPE."""
    read, write = os.pipe()
    os.close(read)
    try:
        env = {**os.environ, "PYTHONDONTWRITEBYTECODE": "1"}
        return subprocess.run([sys.executable, "-m", "panelfx", *args], stdout=write, stderr=subprocess.PIPE,
                              input=stdin, cwd=cwd, env=env, timeout=120)
    finally:
        os.close(write)


@pytest.mark.skipif(sys.platform == "win32", reason="POSIX pipes")
@pytest.mark.parametrize("args", [
    ["check", "visits.csv", "--id", "pid", "--time", "day", "--spacing", "7", "--csv", "-q"],
    ["check", "visits.csv", "--id", "pid", "--time", "day", "--spacing", "7"],
    ["dictionary", "d.json"],
    ["dictionary", "d.json", "--csv"],
    ["apply", "d.json", "visits.csv", "-o", "-", "-q"],
])
def test_closed_stdout_exits_quietly(tmp_path, args):
    """``| head``: the reader of stdout goes away; the command stops with exit code 141
    (128 + SIGPIPE, what the shell reports for tools killed by a closed pipe) and says nothing
    on stderr: no traceback, no 'Broken pipe', no error line."""
    _cohort(50).to_csv(tmp_path / "visits.csv", index=False)
    DERIVATION.save(tmp_path / "d.json")
    run = _into_closed_pipe(*args, cwd=tmp_path)
    assert run.returncode == 141, run.stderr
    assert run.stderr == b""


def test_stdin_and_stdout(tmp_path):
    """``-`` as input reads CSV from stdin and ``-o -`` writes CSV to stdout: the same values as
    through files; progress stays on stderr; Parquet to stdout is refused."""
    _cohort().to_csv(tmp_path / "visits.csv", index=False)
    DERIVATION.save(tmp_path / "d.json")
    text = (tmp_path / "visits.csv").read_text()
    run = _run("apply", "d.json", "-", "-o", "-", input=text, cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert run.stderr.splitlines()[0] == "panelfx apply: read 12 rows, 4 columns from stdin"
    assert run.stderr.splitlines()[-1] == "panelfx apply: wrote 12 rows, 9 columns to stdout"
    assert _run("apply", "d.json", "visits.csv", "-o", "file.csv", "-q", cwd=tmp_path).returncode == 0
    assert run.stdout == (tmp_path / "file.csv").read_text()
    import io

    got = pd.read_csv(io.StringIO(run.stdout))
    expected = DERIVATION.apply(_cohort())
    pd.testing.assert_frame_equal(got.drop(columns="visit"), expected.drop(columns="visit"), check_dtype=False)

    run = _run("check", "-", "--id", "pid", "--time", "day", "--spacing", "30", input=text, cwd=tmp_path)
    assert run.returncode == 0 and run.stdout.startswith("no structural problems found in - (12 rows)"), run.stderr
    run = _run("apply", "d.json", "visits.csv", "-o", "-", "--output-format", "parquet", cwd=tmp_path)
    assert run.returncode == 2 and run.stdout == ""
    assert run.stderr.strip() == "panelfx apply: error: -o - writes CSV to stdout; Parquet needs a file name"
    assert sorted(os.listdir(tmp_path)) == ["d.json", "file.csv", "file.dictionary.csv", "visits.csv"]


def test_check_csv_splits_composite_ids(files, capsys):
    """Several --id columns: the CSV report has one column per id column (named after it,
    ``id_`` in front of a name the report already uses), not the text of a Python tuple."""
    df = _cohort().assign(site=["007"] * 6 + ["7"] * 6, pid=[1, 1, 1, 2, 2, 2] * 2)
    df.loc[1, "day"] = 0  # a duplicate visit of site 007, subject 1
    df.rename(columns={"pid": "row"}).to_csv("sites.csv", index=False)
    assert main(["check", "sites.csv", "--id", "site", "--id", "row", "--time", "day", "--text", "site",
                 "--csv", "-q"]) == 1
    out = capsys.readouterr().out
    import io

    report = pd.read_csv(io.StringIO(out), dtype={"site": str})
    assert list(report.columns) == ["problem", "severity", "site", "id_row", "row", "time", "detail"]
    assert report[["problem", "site", "id_row", "row", "time"]].values.tolist() == [
        ["duplicate", "007", 1, 0, 0], ["duplicate", "007", 1, 1, 0]]
