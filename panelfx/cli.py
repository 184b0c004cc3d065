"""The file commands of ``python -m panelfx`` (also the ``panelfx`` console script).

- ``check INPUT --id COL --time COL [--spacing S] [--tolerance T]``: print the structure
  report of :func:`panelfx.check`.
- ``apply DERIVATION INPUT -o OUTPUT [--table NAME=PATH ...]``: apply a saved
  :class:`~panelfx.Derivation` to a CSV or Parquet file (with the side tables it reads)
  and write Parquet or CSV.  On Parquet bigger than memory (a folder, or ``--memory`` /
  ``--partitions`` / ``--workers`` / ``--row-number``) it works subject by subject through
  hash partitions on disk and writes a folder of parts (:mod:`panelfx._bigfile`).
- ``dictionary DERIVATION [INPUT]``: print the data dictionary of a saved derivation.

The format follows the extension unless ``--input-format`` / ``--output-format`` say
otherwise.  Read: CSV (``.csv``, ``.csv.gz``, ``.tsv``) and Parquet (``.parquet``, ``.pq``, or a
folder of Parquet files with hive partitions) and Feather / Arrow IPC (``.feather``,
``.arrow``) through pyarrow; SAS transport (``.xpt``) and SAS7BDAT through pandas; ``.dta``
and ``.sav`` / ``.zsav`` (the native files of two common statistics packages; needs
``panelfx[formats]``) through pyreadstat.  Written: CSV or
Parquet; a CSV output gets its data dictionary beside it (``out.dictionary.csv``).  Dates
written as text in another layout than ISO 8601 are read with ``--date-format`` or
``--day-first``.  Progress and a summary go to stderr, the report and the dictionary to stdout.

``-`` as the input reads CSV from stdin; ``-o -`` writes CSV to stdout (pipes:
``zcat visits.csv.gz | panelfx apply d.json - -o - | head``).

Exit codes: 0 success; 1 ``check`` found fatal problems; 2 an error (bad arguments, an
unreadable or malformed file, data the derivation refuses, a failed write, ``-o`` naming
one of the files the run reads), reported as one line on stderr; 141 (128 + SIGPIPE, what
the shell reports for other tools) when the reader of stdout stopped early, as ``head``
does, without a message; 143 (128 + SIGTERM) when terminated while writing (no temporary
file is left).  Output is written to a temporary file beside the target and renamed
into place only when complete, so a failed run never leaves a half-written file in place
of a good one.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import signal
import sys
import time
from collections.abc import Callable, Sequence
from typing import Any, NoReturn

import pandas as pd

from .derivation import ATTRS_KEY, DICTIONARY_COLUMNS, TMP_SUFFIX, Derivation, dictionary_frame, write_atomic

__all__ = ["COMMANDS", "read_frame", "write_frame"]

#: Progress is reported on stderr every this many rows read or written.
PROGRESS_ROWS = 1_000_000
#: Progress while reading a CSV file is reported every this many bytes.
PROGRESS_BYTES = 256 * 2**20
#: Rows per batch when reading Parquet and per slice when writing.
BATCH_ROWS = 65_536
#: Findings printed by ``check`` as a table before it says how many more there are.
SHOW_FINDINGS = 100

#: The file name that means stdin (as input) or stdout (as ``-o``).
STDIO = "-"
FORMATS = {".csv": "csv", ".tsv": "csv", ".txt": "csv", ".parquet": "parquet", ".pq": "parquet",
           ".feather": "feather", ".arrow": "feather", ".ipc": "feather",
           ".xpt": "xport", ".sas7bdat": "sas7bdat", ".dta": "dta", ".sav": "sav", ".zsav": "sav"}
#: What can be read (``--input-format``) and written (``--output-format``).
INPUT_FORMATS = ["csv", "parquet", "feather", "xport", "sas7bdat", "dta", "sav"]
OUTPUT_FORMATS = ["csv", "parquet"]
COMPRESSED = (".gz", ".bz2", ".zst", ".lz4")
#: Layouts tried by ``--day-first`` when no ``--date-format`` is given (pandas guesses from the first value).
DAY_FIRST_HINT = "%d/%m/%Y"


class UsageError(Exception):
    """Bad arguments: reported as one line, exit code 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> NoReturn:  # one line, not argparse's usage dump and SystemExit
        raise UsageError(f"{message} (see '{self.prog} --help')")


# ---------------------------------------------------------------------------------- progress


class Progress:
    """Rows read / written, on stderr, every :data:`PROGRESS_ROWS` rows; silent with ``quiet``."""

    def __init__(self, command: str, quiet: bool, summary: bool = True) -> None:
        self.command = command
        self.quiet = quiet
        self.summary = summary  # also say what was read / written when it was small

    def say(self, text: str) -> None:
        if not self.quiet:
            print(f"panelfx {self.command}: {text}", file=sys.stderr, flush=True)

    def done(self, text: str, rows: int) -> None:
        if self.summary or rows >= PROGRESS_ROWS:
            self.say(text)

    def step(self, verb: str, before: int, after: int, total: int | None = None) -> None:
        if after // PROGRESS_ROWS > before // PROGRESS_ROWS and (total is None or after < total):
            of = f" of {total:,}" if total is not None else ""
            self.say(f"{verb} {after:,}{of} rows")


# ---------------------------------------------------------------------------------- files


def _base_name(path: str) -> str:
    """Lower-case name without a compression suffix (pyarrow reads .csv.gz and the like)."""
    name = path.lower()
    for ext in COMPRESSED:
        if name.endswith(ext):
            name = name[: -len(ext)]
    return name


def file_format(path: str, given: str | None, what: str) -> str:
    if given:
        return given
    if what == "input" and os.path.isdir(path):  # a folder of Parquet files (hive partitions too)
        return "parquet"
    fmt = FORMATS.get(os.path.splitext(_base_name(path))[1])
    if what == "output" and fmt is not None and fmt not in OUTPUT_FORMATS:
        raise UsageError(f"cannot write {what} {path!r} as {fmt}: panelfx writes .csv or .parquet")
    if fmt is None:
        known = ", ".join(sorted(FORMATS)) if what == "input" else ".csv, .parquet"
        raise UsageError(f"cannot tell the format of {what} {path!r} from its extension ({known}), "
                         f"or give --{what}-format")
    return fmt


def read_frame(
    path: str,
    fmt: str | None = None,
    *,
    columns: Sequence[str] | None = None,
    text_columns: Sequence[str] = (),
    progress: Progress | None = None,
    dates: Sequence[str] = (),
    date_format: str | None = None,
    day_first: bool = False,
    ids: Sequence[str] = (),
    encoding: str | None = None,
) -> pd.DataFrame:
    """Read a data file into pandas (dates as datetime64): CSV, Parquet (a file, or a folder of
    files with hive partitions ``key=value/``) and Feather / Arrow IPC through pyarrow; SAS
    transport (.xpt) and SAS7BDAT through ``pandas.read_sas``; .dta and .sav/.zsav (the native
    files of two common statistics packages) through pyreadstat (``pip install 'panelfx[formats]'``).
    The format follows the extension unless ``fmt`` is given.

    ``columns`` reads only those; ``text_columns`` keeps CSV columns as text (ids such as
    "007" would otherwise become numbers).  ``dates`` are the columns that must hold dates
    or numbers (the time column): text there is parsed with ``date_format`` (strftime codes,
    as ``pandas.to_datetime(format=)``) or, with ``day_first``, in the day-first layout of its
    first value, and refused otherwise with the command-line option to use.  ``ids`` name the
    subjects of values that do not parse.  ``encoding`` is that of CSV and SAS text."""
    import pyarrow as pa

    fmt = file_format(path, fmt or ("csv" if path == STDIO else None), "input")
    progress = progress or Progress("read", quiet=True)
    if fmt not in ("csv", "parquet") and path == STDIO:
        raise UsageError(f"- reads CSV or Parquet from stdin, not {fmt}: give the file name")
    if fmt not in ("csv", "parquet"):
        frame = _read_other(path, fmt, columns, encoding)
        if columns is not None:
            _require(list(frame.columns), columns, path)
            frame = frame[list(columns)]
        frame = parse_dates(frame, dates, date_format, day_first, path, ids)
        progress.done(f"read {len(frame):,} rows, {frame.shape[1]} columns from {path}", len(frame))
        return frame
    if date_format is not None or day_first:  # CSV dates are parsed here, not guessed by pyarrow
        text_columns = [*text_columns, *dates]
    # stdin is read whole into memory once (the frame is held in memory anyway): CSV
    # column checks and Parquet both need to read it more than once.
    data: Any = io.BytesIO(sys.stdin.buffer.read()) if path == STDIO else None
    if data is None and not os.path.exists(path):
        raise FileNotFoundError(f"input file {path!r} does not exist")
    where = "stdin" if data is not None else path
    if fmt == "parquet" and data is None and os.path.isdir(path):
        table = _read_dataset(path, columns)
    elif fmt == "parquet":
        import pyarrow.parquet as pq

        pf = pq.ParquetFile(data if data is not None else path)
        names = pf.schema_arrow.names
        if columns is not None:
            _require(names, columns, where)
        total = pf.metadata.num_rows
        batches, done = [], 0
        for batch in pf.iter_batches(batch_size=BATCH_ROWS, columns=list(columns) if columns is not None else None):
            batches.append(batch)
            progress.step("read", done, done + batch.num_rows, total)
            done += batch.num_rows
        schema = pf.schema_arrow if columns is None else pa.schema([pf.schema_arrow.field(c) for c in columns],
                                                                   metadata=pf.schema_arrow.metadata)
        table = pa.Table.from_batches(batches, schema=schema)
    else:
        import pyarrow.csv as pc

        delimiter = "\t" if _base_name(path).endswith(".tsv") else ","
        convert = pc.ConvertOptions(
            include_columns=list(columns) if columns is not None else None,
            column_types={c: pa.string() for c in text_columns},
        )
        parse = pc.ParseOptions(delimiter=delimiter)
        read = pc.ReadOptions(encoding=encoding or "utf8")
        if columns is not None:  # name a missing column the way derive does
            with pc.open_csv(data if data is not None else path, parse_options=parse, read_options=read) as reader:
                _require(reader.schema.names, columns, where)
            if data is not None:
                data.seek(0)
        # Rows are known only once parsed (types are inferred over the whole file), so progress
        # while reading a CSV counts the bytes read from the file.
        size = len(data.getbuffer()) if data is not None else os.path.getsize(path)
        with (open(path, "rb") if data is None else data) as raw:
            counted = _CountingFile(raw, size, progress, where)
            source: Any = pa.PythonFile(counted, mode="r")
            codec = _codec(path)
            if codec is not None:
                source = pa.CompressedInputStream(source, codec)
            table = pc.read_csv(source, parse_options=parse, convert_options=convert, read_options=read)
    frame = parse_dates(table.to_pandas(date_as_object=False), dates, date_format, day_first, where, ids)
    progress.done(f"read {len(frame):,} rows, {frame.shape[1]} columns from {where}", len(frame))
    return frame


def _read_dataset(path: str, columns: Sequence[str] | None) -> Any:
    """A folder of Parquet files as one table (pyarrow.dataset; ``key=value`` folders become columns)."""
    import pyarrow.dataset as ds

    dataset = ds.dataset(path, format="parquet", partitioning="hive")
    if columns is not None:
        _require(dataset.schema.names, columns, path)
    return dataset.to_table(columns=list(columns) if columns is not None else None)


#: SAS formats of numeric date and datetime columns (SAS 9.4 Formats and Informats reference):
#: values are days, or seconds, since 1960-01-01.  pandas converts them in SAS7BDAT files but
#: leaves them as numbers in transport files.
SAS_DATE_FORMATS = ("DATE", "DAY", "DDMMYY", "MMDDYY", "YYMMDD", "E8601DA", "IS8601DA", "B8601DA", "WEEKDATE",
                    "WORDDATE", "MONYY", "YYMON", "YYQ", "JULIAN", "NLDATE", "MINGUO", "EURDFDD")
SAS_DATETIME_FORMATS = ("DATETIME", "E8601DT", "IS8601DT", "B8601DT", "DATEAMPM", "NLDATM", "MDYAMPM")
SAS_EPOCH = pd.Timestamp("1960-01-01")


def _read_other(path: str, fmt: str, columns: Sequence[str] | None, encoding: str | None) -> pd.DataFrame:
    """Feather / Arrow IPC through pyarrow; SAS files through pandas; .dta and .sav/.zsav files (the
    native files of two common statistics packages) through pyreadstat."""
    if not os.path.exists(path):
        raise FileNotFoundError(f"input file {path!r} does not exist")
    if fmt == "feather":
        import pyarrow.feather as feather

        return feather.read_table(path).to_pandas(date_as_object=False)
    if fmt in ("dta", "sav"):
        try:
            import pyreadstat
        except ImportError:
            from .errors import MissingDependencyError

            raise MissingDependencyError(f"reading .{fmt} files ({path}) needs pyreadstat, an optional dependency: "
                                         "pip install 'panelfx[formats]'", extra="formats") from None
        read = pyreadstat.read_dta if fmt == "dta" else pyreadstat.read_sav
        frame, _ = read(path, usecols=list(columns) if columns is not None else None,
                        dates_as_pandas_datetime=True, encoding=encoding, output_format="pandas")
        return frame
    # SAS: "infer" reads the encoding a SAS7BDAT file records; transport files record none, and
    # are read as Latin-1 (what pandas 3 means by "infer" there; pandas 2.2 refuses "infer" for them)
    if fmt == "sas7bdat":
        return pd.read_sas(path, format="sas7bdat", encoding=encoding or "infer")
    reader = pd.read_sas(path, format="xport", encoding=encoding or "latin-1", iterator=True)
    with reader:
        frame = reader.read()
        # the SAS format of each variable, without its width (DATE9. -> DATE)
        formats = {f["name"].decode("ascii", "replace").strip(): f["nform"].decode("ascii", "replace").strip()
                   .rstrip("0123456789.").upper() for f in reader.fields}
    for name, form in formats.items():
        if name in frame.columns and frame[name].dtype.kind == "f":
            if form in SAS_DATE_FORMATS:
                frame[name] = SAS_EPOCH + pd.to_timedelta(frame[name], unit="D")
            elif form in SAS_DATETIME_FORMATS:
                frame[name] = SAS_EPOCH + pd.to_timedelta(frame[name], unit="s")
    return frame


def parse_dates(frame: pd.DataFrame, dates: Sequence[str], date_format: str | None, day_first: bool,
                where: str, ids: Sequence[str] = ()) -> pd.DataFrame:
    """Text in the ``dates`` columns of ``frame`` parsed as dates (see :func:`read_frame`); a copy
    when anything changes.  Columns absent from the frame are left to the caller's checks."""
    from .errors import ColumnTypeError, TimeTypeError

    out = frame
    for k, col in enumerate(dict.fromkeys(dates)):
        if col not in frame.columns or not _is_text(frame[col]):
            continue
        text = frame[col]
        given = text.notna() & (text.astype(str).str.strip() != "")
        error = TimeTypeError if k == 0 else ColumnTypeError
        if date_format is None and not day_first:
            first = text[given].head(3).tolist()
            raise error(f"column {col!r} of {where} holds text, not dates or numbers (first values: "
                        f"{', '.join(map(repr, first))}): give its layout with --date-format, e.g. "
                        f"--date-format '{DAY_FIRST_HINT}', or --day-first for day/month/year dates",
                        column=col, count=int(given.sum()), ids=_ids_of(frame, ids, given))
        layout = date_format
        if layout is None:  # --day-first: the layout pandas sees in the first value, day first
            try:
                from pandas.tseries.api import guess_datetime_format
            except ImportError:  # pragma: no cover - public from pandas 2.2 on; the same function before
                from pandas._libs.tslibs.parsing import guess_datetime_format

            first_value = str(text[given].iloc[0]) if given.any() else ""
            layout = guess_datetime_format(first_value, dayfirst=True) if first_value else "%d/%m/%Y"
            if layout is None:
                raise error(f"column {col!r} of {where}: cannot tell the date layout of {first_value!r}: give it "
                            f"with --date-format, e.g. --date-format '{DAY_FIRST_HINT}'", column=col,
                            count=int(given.sum()), ids=_ids_of(frame, ids, given))
        try:
            parsed = pd.to_datetime(text.where(given), format=layout, errors="coerce")
        except ValueError as err:  # a format pandas cannot use at all
            raise error(f"--date-format {layout!r} cannot be used on column {col!r}: {err}", column=col) from None
        bad = given & parsed.isna()
        if bad.any():
            option = f"--date-format '{layout}'" if date_format is not None else f"--day-first (layout {layout!r})"
            rows = [int(i) for i in bad.to_numpy().nonzero()[0][:5]]
            shown = ", ".join(f"{r} ({text.iloc[r]!r})" for r in rows)
            raise error(f"column {col!r} of {where}: {int(bad.sum())} value(s) do not fit {option}; rows "
                        f"{shown}{' ...' if bad.sum() > 5 else ''}: give the layout the file uses with "
                        "--date-format", column=col, count=int(bad.sum()), ids=_ids_of(frame, ids, bad))
        if out is frame:
            out = frame.copy()
        out[col] = parsed
    return out


def _is_text(column: pd.Series) -> bool:
    if column.dtype == object:  # infer_dtype looks at the values in C, without a Python loop
        return pd.api.types.infer_dtype(column, skipna=True) == "string"
    return pd.api.types.is_string_dtype(column.dtype)


def _ids_of(frame: pd.DataFrame, ids: Sequence[str], mask: pd.Series) -> list[Any]:
    """Subject ids of the masked rows (first ones, each once), or their 0-based row numbers."""
    if ids and all(c in frame.columns for c in ids):
        keys = frame.loc[mask.to_numpy(), list(ids)].head(50)
        values = keys.iloc[:, 0].tolist() if len(ids) == 1 else list(keys.itertuples(index=False, name=None))
        return list(dict.fromkeys(values))
    return [int(i) for i in mask.to_numpy().nonzero()[0][:5]]


class _CountingFile(io.RawIOBase):
    """A binary file that reports, every :data:`PROGRESS_BYTES`, how much of it has been read."""

    def __init__(self, raw: Any, size: int, progress: Progress, path: str) -> None:
        self.raw, self.size, self.progress, self.path, self.done = raw, size, progress, path, 0

    def readable(self) -> bool:
        return True

    def readinto(self, buffer: Any) -> int:
        n = self.raw.readinto(buffer)
        before, self.done = self.done, self.done + (n or 0)
        if self.done // PROGRESS_BYTES > before // PROGRESS_BYTES:
            self.progress.say(f"read {self.done / 2**20:,.0f} of {self.size / 2**20:,.0f} MB of {self.path}")
        return n


def _codec(path: str) -> str | None:
    name = path.lower()
    return {".gz": "gzip", ".bz2": "bz2", ".zst": "zstd", ".lz4": "lz4"}.get(os.path.splitext(name)[1])


def _require(names: Sequence[str], columns: Sequence[str], path: str) -> None:
    missing = [c for c in columns if c not in names]
    if missing:
        from .errors import MissingColumnError

        raise MissingColumnError(f"column {missing[0]!r} is not in {path} (columns: {list(names)[:20]})",
                                 column=missing[0], count=len(missing))


def write_frame(
    frame: pd.DataFrame,
    path: str,
    fmt: str | None = None,
    *,
    metadata: dict[str, Any] | None = None,
    field_metadata: dict[str, dict[str, Any]] | None = None,
    progress: Progress | None = None,
) -> None:
    """Write ``frame`` as Parquet or CSV through pyarrow, atomically (temporary file + rename).

    ``metadata`` goes into the Parquet file's key-value metadata as JSON (key ``panelfx``),
    ``field_metadata`` onto the named columns' fields; CSV has no place for either."""
    import pyarrow as pa

    fmt = file_format(path, fmt or ("csv" if path == STDIO else None), "output")
    if path == STDIO and fmt != "csv":
        raise UsageError("-o - writes CSV to stdout; Parquet needs a file name")
    progress = progress or Progress("write", quiet=True)
    table = pa.Table.from_pandas(frame)
    if fmt == "parquet":
        fields = []
        for field in table.schema:
            extra = (field_metadata or {}).get(field.name)
            fields.append(field.with_metadata({**(field.metadata or {}), ATTRS_KEY.encode(): _dumps(extra)})
                          if extra else field)
        schema_meta = dict(table.schema.metadata or {})
        if metadata is not None:
            schema_meta[ATTRS_KEY.encode()] = _dumps(metadata)
        table = pa.Table.from_arrays(table.columns, schema=pa.schema(fields, metadata=schema_meta))
    else:
        # CSV cannot hold categories: write their values.
        for i, field in enumerate(table.schema):
            if pa.types.is_dictionary(field.type):
                table = table.set_column(i, field.name, table.column(i).cast(field.type.value_type))

    def write(tmp: Any) -> None:
        done = 0
        step = max(1, min(BATCH_ROWS * 16, PROGRESS_ROWS))
        if fmt == "parquet":
            import pyarrow.parquet as pq

            with pq.ParquetWriter(tmp, table.schema) as writer:
                for start in range(0, max(table.num_rows, 1), step):
                    part = table.slice(start, step)
                    writer.write_table(part)
                    progress.step("wrote", done, done + part.num_rows, table.num_rows)
                    done += part.num_rows
        else:
            import pyarrow.csv as pc

            with pc.CSVWriter(tmp, table.schema) as writer:
                for start in range(0, table.num_rows, step):
                    part = table.slice(start, step)
                    writer.write_table(part)
                    progress.step("wrote", done, done + part.num_rows, table.num_rows)
                    done += part.num_rows

    if path == STDIO:  # a pipe cannot be replaced atomically: write straight to it
        sys.stdout.flush()
        write(sys.stdout.buffer)
        sys.stdout.buffer.flush()
        progress.say(f"wrote {table.num_rows:,} rows, {table.num_columns} columns to stdout")
        return
    existed = os.path.exists(path)
    _sweep_stale(path)
    try:
        with _terminate_cleanly():
            write_atomic(path, write)
    except OSError as err:
        kept = f"{path} was left as it was" if existed else f"no {path} was made"
        reason = " ".join(str(err.strerror or err).split()) or type(err).__name__
        raise OSError(f"writing {path} failed ({kept}): {reason}") from err
    progress.say(f"wrote {table.num_rows:,} rows, {table.num_columns} columns to {path}")


class Terminated(BaseException):
    """SIGTERM arrived while writing: raised so that the temporary file is removed on the way out."""


#: When the current command started: temporary files older than this are left by earlier runs.
_started = time.time()


def _sweep_stale(path: str) -> None:
    """Remove temporary files an earlier, killed run left beside ``path`` (``kill -9`` cannot be
    caught): same target name and suffix as :func:`~panelfx.derivation.write_atomic` makes,
    last written before this run started, so a concurrent writer's live file is not touched."""
    folder, base = os.path.split(os.path.abspath(path))
    prefix = f".{base}."
    try:
        names = os.listdir(folder)
    except OSError:
        return
    for name in names:
        if name.startswith(prefix) and name.endswith(TMP_SUFFIX):
            stale = os.path.join(folder, name)
            try:
                if os.stat(stale).st_mtime < _started:
                    os.remove(stale)
            except OSError:  # gone already, or not ours to remove
                pass


class _terminate_cleanly:
    """While writing, SIGTERM raises :class:`Terminated` (the atomic writer then removes its
    temporary file) instead of killing the process at once; the old handler comes back after."""

    def __enter__(self) -> None:
        self.old: Any = None
        try:
            self.old = signal.signal(signal.SIGTERM, self._raise)
        except ValueError:  # not the main thread: signals cannot be handled here
            pass

    @staticmethod
    def _raise(signum: int, frame: Any) -> None:
        raise Terminated()

    def __exit__(self, *exc: object) -> None:
        if self.old is not None:
            signal.signal(signal.SIGTERM, self.old)


def _dumps(value: Any) -> bytes:
    return json.dumps(value, ensure_ascii=False, allow_nan=False, default=str).encode("utf-8")


# ---------------------------------------------------------------------------------- commands


def _number_or_text(value: str) -> float | int | str:
    """``--spacing 30`` is a number (numeric times), ``--spacing 30D`` a time span (datetimes)."""
    try:
        number = float(value)
    except ValueError:
        return value
    return int(number) if number.is_integer() and "." not in value and "e" not in value.lower() else number


def _check(argv: list[str]) -> int:
    from .check import check

    parser = _Parser(prog="panelfx check", description="Print the structure report of a long-format panel file "
                     "(exit code 1 when fatal problems are found).")
    parser.add_argument("input", help="CSV or Parquet file, one row per subject per occasion; - reads CSV from stdin")
    parser.add_argument("--id", action="append", required=True, metavar="COL",
                        help="subject id column; repeat for several (e.g. --id site --id subject)")
    parser.add_argument("--time", required=True, metavar="COL", help="occasion time column (numbers or dates)")
    parser.add_argument("--spacing", type=_number_or_text, metavar="S",
                        help="planned interval between occasions: a number, or a span such as 30D for dates")
    parser.add_argument("--tolerance", type=_number_or_text, metavar="T",
                        help="allowed distance from the planned time (default a quarter of --spacing)")
    parser.add_argument("--order", metavar="COL",
                        help="column that orders rows sharing a subject and time (tied rows are then no duplicates)")
    parser.add_argument("--notes", action="store_true", help="also report single-occasion subjects and row order")
    parser.add_argument("--csv", action="store_true", help="print every finding as CSV instead of a table")
    _input_options(parser, quiet="no progress on stderr")
    args = parser.parse_args(argv)
    progress = Progress("check", args.quiet, summary=False)
    keys = [*args.id, args.time, *([args.order] if args.order else [])]
    frame = read_frame(args.input, args.input_format, columns=[*dict.fromkeys(keys)],
                       text_columns=[c for c in args.text if c in (*args.id, args.time)], progress=progress,
                       dates=[args.time], ids=args.id, **_reading(args))
    report = check(frame, id=args.id if len(args.id) > 1 else args.id[0], time=args.time,
                   spacing=args.spacing, tolerance=args.tolerance, notes=args.notes, order=args.order)
    fatal = int((report["severity"] == "fatal").sum())
    if args.csv:
        _split_ids(report, args.id).to_csv(sys.stdout, index=False)
    elif report.empty:
        print(f"no structural problems found in {args.input} ({len(frame):,} rows)")
    else:
        counts = report["severity"].value_counts()
        words = ", ".join(f"{int(counts[s])} {s}" for s in ("fatal", "warning", "note") if s in counts)
        print(f"{len(report):,} finding(s) in {args.input} ({len(frame):,} rows): {words}")
        print(report.head(SHOW_FINDINGS).to_string(index=False))
        if len(report) > SHOW_FINDINGS:
            print(f"... and {len(report) - SHOW_FINDINGS:,} more (--csv prints every finding)")
        print("row is the 0-based position of the data row in the file")
    return 1 if fatal else 0


def _split_ids(report: pd.DataFrame, id_cols: Sequence[str]) -> pd.DataFrame:
    """Composite ids as one CSV column per id column (named after it) in place of the tuple
    column ``id``; a name the report already uses gets an ``id_`` prefix."""
    if len(id_cols) == 1:
        return report
    at = report.columns.get_loc("id")
    parts = {}
    for k, col in enumerate(id_cols):
        name = col if col not in report.columns else f"id_{col}"
        parts[name] = [v[k] if isinstance(v, tuple) else None for v in report["id"]]
    split = pd.DataFrame(parts, index=report.index, dtype=object)
    return pd.concat([report.iloc[:, :at], split, report.iloc[:, at + 1:]], axis=1)


def _table_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--table", action="append", default=[], metavar="NAME=PATH",
                        help="a side table the derivation reads (e.g. --table labs=labs.parquet); repeatable")


def _read_tables(specs: Sequence[str], derivation: Derivation, text: Sequence[str],
                 progress: Progress, *, required: bool,
                 args: argparse.Namespace | None = None) -> dict[str, pd.DataFrame]:
    """--table NAME=PATH options: checked against the tables the derivation reads, then read."""
    given: dict[str, str] = {}
    for spec in specs:
        name, sep, path = spec.partition("=")
        if not sep or not name or not path:
            raise UsageError(f"--table expects NAME=PATH, got {spec!r}")
        if name in given:
            raise UsageError(f"--table {name} is given twice")
        given[name] = path
    needed = derivation.tables()
    unknown = [n for n in given if n not in needed]
    if unknown:
        raise UsageError(f"--table {unknown[0]}: the derivation reads no table of that name "
                         f"(it reads: {', '.join(needed) or 'none'})")
    lacking = [n for n in needed if n not in given]
    if lacking and required:
        raise UsageError(f"the derivation reads side table(s) {', '.join(lacking)}: give --table "
                         f"{lacking[0]}=PATH")
    for name, path in given.items():
        file_format(path, None, "input")
        if not os.path.exists(path):
            raise FileNotFoundError(f"side table file {path!r} (--table {name}) does not exist")
    options = _reading(args) if args is not None else {}
    return {name: read_frame(path, None, text_columns=text, progress=progress, ids=derivation.id_cols,
                             dates=[t for use in derivation_uses(derivation, name) for t in (use.time, *use.ends)]
                             + list(getattr(args, "date", [])), **options)
            for name, path in given.items()}


def derivation_uses(derivation: Derivation, name: str) -> list[Any]:
    """What the transforms read from side table ``name`` (its time columns first)."""
    return [use for tr in derivation.transforms for use in tr.tables() if use.name == name]


def _reading(args: argparse.Namespace) -> dict[str, Any]:
    """The reading options of :func:`_input_options` as keywords of :func:`read_frame`."""
    if args.date_format is not None and args.day_first:
        raise UsageError("give --date-format or --day-first, not both (the format already says where the day is)")
    return {"date_format": args.date_format, "day_first": args.day_first, "encoding": args.encoding}


def _input_options(parser: argparse.ArgumentParser, *, quiet: str) -> None:
    """Options every command that reads an input file shares."""
    parser.add_argument("--text", action="append", default=[], metavar="COL",
                        help="read this CSV column as text (e.g. ids with leading zeros); repeatable")
    parser.add_argument("--input-format", choices=INPUT_FORMATS,
                        help="the input's format when its extension does not say (.csv .tsv .parquet or a folder of "
                             "Parquet files, .feather .arrow, .xpt, .sas7bdat, .dta, .sav .zsav)")
    dates = parser.add_argument_group(
        "dates written as text", "The time column (and --date columns) may hold dates as text in a layout other "
        "than ISO 8601 (2024-03-01), which is read as dates without options.")
    dates.add_argument("--date-format", metavar="FMT",
                       help="the layout of those dates in strftime codes, e.g. %%d/%%m/%%Y or '%%d%%b%%Y %%H:%%M' "
                            "(as pandas.to_datetime(format=))")
    dates.add_argument("--day-first", action="store_true",
                       help="dates are day first (31/12/2024); the layout is read from the first value")
    dates.add_argument("--date", action="append", default=[], metavar="COL",
                       help="another column of dates written as text (besides the time column); repeatable")
    parser.add_argument("--encoding", metavar="ENC",
                        help="text encoding of CSV and SAS files (default: UTF-8 for CSV, the file's own for SAS)")
    parser.add_argument("-q", "--quiet", action="store_true", help=quiet)


def _apply(argv: list[str]) -> int:
    parser = _Parser(prog="panelfx apply", description="Apply a saved derivation to a CSV or Parquet file and "
                     "write the result (Parquet keeps the derivation and its data dictionary in its metadata).")
    parser.add_argument("derivation", help="saved derivation (JSON, from Derivation.save)")
    parser.add_argument("input", help="CSV or Parquet file; - reads CSV from stdin")
    parser.add_argument("-o", "--output", required=True, help="output file, .parquet or .csv; - writes CSV to stdout")
    parser.add_argument("--output-format", choices=OUTPUT_FORMATS)
    side = parser.add_mutually_exclusive_group()
    side.add_argument("--dictionary", metavar="PATH",
                      help="write the data dictionary as CSV to PATH (default beside a CSV output: "
                           "OUT.dictionary.csv; Parquet keeps it in its metadata)")
    side.add_argument("--no-dictionary", action="store_true", help="no data dictionary file beside a CSV output")
    _table_option(parser)
    _input_options(parser, quiet="no progress or summary on stderr")
    big = parser.add_argument_group(
        "data bigger than memory", "A Parquet folder as input, or any of these options, works subject by subject "
        "through hash partitions on disk and writes OUTPUT as a folder of Parquet parts (renamed into place when "
        "complete). Same values as the in-memory path; rows come partition by partition.")
    big.add_argument("--memory", metavar="SIZE", help="memory budget, e.g. 4GB (default: half of this machine's)")
    big.add_argument("--partitions", type=int, metavar="N", help="number of partitions (default: from --memory)")
    big.add_argument("--workers", type=int, default=1, metavar="N",
                     help="partitions worked on at once, by Dask's local scheduler (needs panelfx[dask])")
    big.add_argument("--row-number", metavar="COL", help="add each row's 0-based number in the input as COL")
    args = parser.parse_args(argv)
    progress = Progress("apply", args.quiet)
    # Fail fast, before reading a large input: the derivation, the formats, the output folder.
    derivation = Derivation.load(args.derivation)
    sources = {"input": args.input, "derivation": args.derivation,
               **{f"--table {spec.partition('=')[0]}": spec.partition("=")[2] for spec in args.table}}
    _refuse_overwrite(args.output, sources)
    if args.input != STDIO and (os.path.isdir(args.input)
                                or any(v is not None for v in (args.memory, args.partitions, args.row_number))
                                or args.workers != 1):
        if args.dictionary is not None:
            raise UsageError(f"--dictionary: a partitioned apply keeps the data dictionary in each part's metadata "
                             f"and in {args.output}{os.sep}_panelfx.json")
        return _apply_partitioned(derivation, args, progress)
    file_format(args.input, args.input_format or ("csv" if args.input == STDIO else None), "input")
    file_format(args.output, args.output_format or ("csv" if args.output == STDIO else None), "output")
    if args.output == STDIO and args.output_format == "parquet":
        raise UsageError("-o - writes CSV to stdout; Parquet needs a file name")
    folder = os.path.dirname(os.path.abspath(args.output))
    if args.output != STDIO and not os.path.isdir(folder):
        raise FileNotFoundError(f"output folder {folder!r} does not exist")
    sidecar = _sidecar(args, sources)
    if args.input != STDIO and file_format(args.input, args.input_format, "input") == "parquet" \
            and os.path.exists(args.input):
        import pyarrow.parquet as pq

        _require(pq.read_schema(args.input).names, [*derivation.id_cols, derivation.time, *derivation.inputs()],
                 args.input)
    tables = _read_tables(args.table, derivation, args.text, progress, required=True, args=args)
    frame = read_frame(args.input, args.input_format, text_columns=args.text, progress=progress,
                       dates=[derivation.time, *args.date], ids=derivation.id_cols, **_reading(args))
    result = derivation.apply(frame, tables)
    progress.say(f"derived {len(derivation.outputs())} column(s): {', '.join(derivation.outputs())}")
    record = {**result.attrs[ATTRS_KEY], "input": "stdin" if args.input == STDIO else os.path.basename(args.input)}
    if tables:
        record["tables"] = {name: os.path.basename(path) for name, path in
                            (spec.partition("=")[::2] for spec in args.table)}
    fields = {row["column"]: {k: v for k, v in row.items() if k != "column"} for row in record["dictionary"]}

    def write_result() -> None:
        write_frame(result, args.output, args.output_format, metadata=record, field_metadata=fields,
                    progress=progress)

    if sidecar is None:
        write_result()
        return 0
    # The dictionary's temporary file is renamed into place right after the output is: a run
    # that fails while writing the output leaves neither changed.
    table = dictionary_frame(record["dictionary"])
    _sweep_stale(sidecar)

    def write_both(tmp: str) -> None:
        table.to_csv(tmp, index=False)
        write_result()

    try:
        write_atomic(sidecar, write_both)
    except OSError as err:
        if str(err).startswith(f"writing {args.output} failed"):
            raise
        raise OSError(f"writing the data dictionary {sidecar} failed (the output {args.output} was written): "
                      f"{' '.join(str(err.strerror or err).split())}") from err
    progress.say(f"wrote the data dictionary ({len(table)} columns) to {sidecar}")
    return 0


#: Name of the data dictionary written beside a CSV output ``out.csv``: ``out`` + this.
DICTIONARY_SUFFIX = ".dictionary.csv"


def _sidecar(args: argparse.Namespace, sources: dict[str, str]) -> str | None:
    """The data dictionary file of this apply, checked before any work: ``--dictionary PATH``,
    or ``OUT.dictionary.csv`` beside a CSV output (none for Parquet, stdout or --no-dictionary).
    Like the output, it may not be a file the run reads; the default one replaces only a data
    dictionary written earlier (its first line is the dictionary's header), never another file."""
    if args.no_dictionary:
        return None
    explicit = args.dictionary is not None
    if explicit:
        path = args.dictionary
        if path == STDIO:
            raise UsageError("--dictionary needs a file name (stdout carries the output or nothing)")
    else:
        if args.output == STDIO or file_format(args.output, args.output_format, "output") != "csv":
            return None
        base = os.path.basename(args.output)
        stem = base[: len(os.path.splitext(_base_name(base))[0])]  # out.csv.gz -> out
        path = os.path.join(os.path.dirname(args.output), stem + DICTIONARY_SUFFIX)
    if path == args.output or (os.path.exists(path) and os.path.exists(args.output)
                               and os.path.samefile(path, args.output)):
        raise UsageError(f"--dictionary {path} is the output file: give another name")
    _refuse_overwrite(path, sources, option="--dictionary" if explicit else "the data dictionary")
    if not explicit and os.path.exists(path) and not _is_dictionary(path):
        raise UsageError(f"{path} exists and is not a data dictionary written by panelfx apply: refusing to "
                         "overwrite it; remove it, or give --dictionary PATH or --no-dictionary")
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise FileNotFoundError(f"data dictionary folder {folder!r} does not exist")
    return path


def _is_dictionary(path: str) -> bool:
    """The file starts with the header line of a data dictionary (so panelfx wrote it)."""
    header = ",".join(DICTIONARY_COLUMNS)
    try:
        with open(path, "rb") as fh:
            first = fh.read(len(header) + 2)
    except OSError:
        return False
    return first.decode("utf-8", "replace").splitlines()[:1] == [header]


def _refuse_overwrite(output: str, sources: dict[str, str], option: str = "-o") -> None:
    """Refuse an output that is one of the files the run reads (same file, however named):
    writing it would destroy the data the result comes from."""
    for what, path in sources.items():
        if STDIO in (output, path):  # stdin / stdout, not files
            continue
        try:
            same = os.path.samefile(output, path)  # compares device and inode: links and ../ spellings too
        except OSError:  # one of them does not exist (yet): they cannot be the same file
            continue
        if same:
            raise UsageError(f"{option} {output} is the {what} file {path}: refusing to overwrite it; "
                             "write the result to another file")


def _apply_partitioned(derivation: Derivation, args: argparse.Namespace, progress: Progress) -> int:
    from ._bigfile import apply_partitioned, parse_size

    if args.date_format is not None or args.day_first or args.date:
        raise UsageError("--date-format, --day-first and --date read dates written as text; a partitioned apply "
                         "reads Parquet, which holds dates as dates")
    if args.table or derivation.tables():
        raise UsageError("side tables (--table) are not supported by the partitioned apply yet; for data bigger "
                         "than memory with side tables use panelfx.dask.derive(..., tables=)")
    if not os.path.isdir(args.input) and file_format(args.input, args.input_format, "input") != "parquet":
        raise UsageError("data bigger than memory is read from Parquet (a file or a folder): convert the CSV first")
    if args.output_format == "csv":
        raise UsageError("a partitioned apply writes a folder of Parquet parts; --output-format csv is not possible")
    if args.partitions is not None and args.partitions < 1:
        raise UsageError(f"--partitions must be at least 1, got {args.partitions}")
    memory = parse_size(args.memory) if args.memory is not None else _half_of_memory()
    apply_partitioned(derivation, args.input, args.output, memory=memory, partitions=args.partitions,
                      workers=args.workers, row_number=args.row_number, progress=progress)
    return 0


def _half_of_memory() -> int:
    try:
        return int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")) // 2
    except (ValueError, OSError, AttributeError):  # pragma: no cover - not a POSIX system
        return 4 * 2**30


def _dictionary(argv: list[str]) -> int:
    parser = _Parser(prog="panelfx dictionary", description="Print the data dictionary of a saved derivation: "
                     "one row per output column.")
    parser.add_argument("derivation", help="saved derivation (JSON)")
    parser.add_argument("input", nargs="?", help="optional CSV or Parquet file: fills in the dtypes of the result")
    parser.add_argument("--csv", action="store_true", help="print CSV instead of a table")
    _table_option(parser)
    _input_options(parser, quiet="no progress on stderr")
    args = parser.parse_args(argv)
    derivation = Derivation.load(args.derivation)
    frame = None
    tables = _read_tables(args.table, derivation, args.text, Progress("dictionary", args.quiet, summary=False),
                          required=args.input is not None, args=args)
    if args.input is not None:
        frame = read_frame(args.input, args.input_format, text_columns=args.text,
                           progress=Progress("dictionary", args.quiet, summary=False),
                           dates=[derivation.time, *args.date], ids=derivation.id_cols, **_reading(args))
    table = derivation.dictionary(frame, tables)
    if args.csv:
        table.to_csv(sys.stdout, index=False)
        return 0
    ids = derivation.id if isinstance(derivation.id, str) else ", ".join(derivation.id)
    if derivation.description:
        print(derivation.description)
    print(f"panel: id {ids}; time {derivation.time}" + (f"; unit {derivation.unit}" if derivation.unit else ""))
    if table.empty:
        print("(the derivation has no transforms)")
    else:
        with pd.option_context("display.max_colwidth", None, "display.width", 10_000):
            print(table.to_string(index=False))
    return 0


def _run(name: str, command: Callable[[list[str]], int]) -> Callable[[list[str]], int]:
    """Wrap a command: errors become one line on stderr and exit code 2."""

    def run(argv: list[str]) -> int:
        global _started
        _started = time.time()
        try:
            code = command(list(argv))
            sys.stdout.flush()  # a closed pipe shows here, not at exit where it would print a message
            return code
        except BrokenPipeError:
            return _stdout_closed()
        except SystemExit as stop:  # --help
            return stop.code if isinstance(stop.code, int) else 0
        except Terminated:  # the temporary file is gone; 128 + 15 as the shell reports SIGTERM
            print(f"panelfx {name}: terminated before the output was complete; nothing was written", file=sys.stderr)
            return 128 + signal.SIGTERM
        except KeyboardInterrupt:
            print(f"panelfx {name}: interrupted", file=sys.stderr)
            return 130
        except Exception as err:  # noqa: BLE001 - the command line reports every failure in one line
            print(f"panelfx {name}: error: {_one_line(err)}", file=sys.stderr)
            return 2

    run.__name__ = f"{name}_command"
    run.__doc__ = command.__doc__
    return run


def _stdout_closed() -> int:
    """The reader of stdout went away (``| head``): stop quietly with 128 + SIGPIPE, as the
    shell reports for other tools cut short.  stdout is pointed at the null device so that
    Python's final flush at exit does not complain again."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):
        pass
    return 128 + 13


def _one_line(err: BaseException) -> str:
    from .errors import PanelError

    text = str(err) if not isinstance(err, KeyError) or isinstance(err, PanelError) else str(err.args[0])
    if isinstance(err, OSError) and err.filename and err.strerror:
        text = f"{err.strerror}: {err.filename}"
    text = " ".join(text.split()) or type(err).__name__
    if isinstance(err, (PanelError, UsageError, OSError)):
        return text
    return f"{type(err).__name__}: {text}"


#: name -> function(argv) -> exit code; dispatched by ``python -m panelfx``.
COMMANDS: dict[str, Callable[[list[str]], int]] = {
    "check": _run("check", _check),
    "apply": _run("apply", _apply),
    "dictionary": _run("dictionary", _dictionary),
}
