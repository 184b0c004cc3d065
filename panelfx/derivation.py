"""Saved derivations: a panel declaration and an ordered list of transforms, as one value.

A :class:`Derivation` is what a data-management pipeline reviews, versions and re-runs on
every data cut.  It applies exactly as :func:`panelfx.derive` does, saves to plain,
versioned JSON (no pickle, no eval, no import of names taken from the file) and
describes its output columns in a data dictionary.

The JSON layer is generic: a transform is saved as its ``type_name`` and its dataclass
fields, and read back through ``panelfx._transform.REGISTRY``.  The type of each option
is checked against the field's annotation, then the transform's own ``__post_init__``
checks its rules, so a new transform needs no code here.

File layout (version 2)::

    {
      "format": "panelfx.derivation",
      "version": 2,
      "description": "...",
      "panel": {"id": "pid", "time": "day", "unit": null},
      "transforms": [{"type": "lag", "options": {"col": "sbp", ...}, "label": "...", "note": "..."}, ...]
    }

Options left out of a file take the transform's defaults; unknown keys are errors.  ``label``
and ``note`` (see :meth:`Derivation.described`) are written only when set.  The JSON Schema
of this layout ships as ``panelfx/derivation.schema.json`` (:meth:`Derivation.json_schema`).
Version-1 files (before default names changed) still load, with the columns they gave
then (:mod:`panelfx._upgrade`).
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import tempfile
import types
import typing
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, Literal, Union

import numpy as np
import pandas as pd

from ._frames import frames, to_pandas
from ._panel import UNITS_NS, as_id_list, key_column, time_kind
from ._subset import ATTRS_KEY, counting
from ._transform import REGISTRY, Transform
from ._upgrade import upgrade_v1
from .derive import Keep, Rows, derive, plan
from .errors import OptionError, PanelError

__all__ = ["Derivation", "DerivationFileError", "FORMAT", "VERSION", "DICTIONARY_COLUMNS"]

#: Marker of a saved derivation and the version of the layout this panelfx writes and reads.
FORMAT = "panelfx.derivation"
VERSION = 2

#: Columns of :meth:`Derivation.dictionary`, in order.
DICTIONARY_COLUMNS = ["column", "step", "transform", "sources", "description", "past_only", "dtype", "time_unit",
                      "label", "note"]

#: Longest label of a transform: ADaM variable labels are at most 40 characters (the SAS V5
#: transport limit the CDISC ADaM Implementation Guide keeps).
LABEL_CHARS = 40

UNIT_WORDS = {
    "ns": "nanoseconds", "us": "microseconds", "ms": "milliseconds", "s": "seconds", "min": "minutes",
    "h": "hours", "D": "days", "W": "weeks", "Y": "years of 365.25 days",
}


class DerivationFileError(OptionError):
    """A saved derivation is malformed: bad JSON, wrong version, unknown key or transform,
    or an option of the wrong type.  ``path`` is where in the file (``transforms[1].options.periods``)."""

    def __init__(self, message: str, *, path: str = "", where: str | None = None) -> None:
        super().__init__(f"{path}: {message}" if path else message, column=None)
        self.path = path if where is None else where  # where=: the message is prefixed already


# ---------------------------------------------------------------------------------- value


@dataclasses.dataclass(frozen=True, init=False)
class Derivation:
    """A panel declaration (``id``, ``time``, ``unit``) and an ordered list of transforms.

    ``Derivation(*transforms, id=, time=, unit=None, description="")`` takes the same
    arguments as :func:`panelfx.derive`; ``apply(frame)`` gives exactly what ``derive``
    gives, and records the provenance in ``result.attrs["panelfx"]``.  The order of the
    transforms is checked when the derivation is built: a transform may use a column made
    by an earlier one, never by a later one, and no two transforms may make the same column.

    >>> import pandas as pd, panelfx as pfx
    >>> d = pfx.Derivation(pfx.baseline("sbp"), pfx.change_from_baseline("sbp"), id="pid", time="day")
    >>> df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 14, 0], "sbp": [150.0, 142.0, 138.0]})
    >>> d.apply(df)
       pid  day    sbp  sbp_baseline  sbp_change
    0    1    0  150.0         150.0         0.0
    1    1   14  142.0         150.0        -8.0
    2    2    0  138.0         138.0         0.0
    >>> pfx.Derivation.from_json(d.to_json()) == d
    True
    >>> d.extend(pfx.lag("sbp_change")).outputs()
    ('sbp_baseline', 'sbp_change', 'sbp_change_lag1')
    """

    id: str | tuple[str, ...]
    time: str
    unit: str | None
    transforms: tuple[Transform, ...]
    description: str
    order: str | None
    time_unit: str | None
    # Per transform (same positions), "" for none; () when no transform has one.  Set by
    # described(), never by the constructor, so transforms need no label options of their own.
    labels: tuple[str, ...] = dataclasses.field(default=(), repr=False)
    notes: tuple[str, ...] = dataclasses.field(default=(), repr=False)

    def __init__(
        self,
        *transforms: Transform,
        id: str | Sequence[str],
        time: str,
        unit: str | None = None,
        description: str = "",
        order: str | None = None,
        time_unit: str | None = None,
    ) -> None:
        ids = as_id_list(id)
        if not isinstance(time, str) or not time:
            raise OptionError(f"time must be a column name (a non-empty string), got {time!r}")
        if time in ids:
            raise OptionError(f"time column {time!r} is also an id column")
        if unit is not None and unit not in UNITS_NS:
            raise OptionError(f"unit must be one of {sorted(UNITS_NS)} or None, got {unit!r}")
        if not isinstance(description, str):
            raise OptionError(f"description must be a string, got {description!r}")
        if order is not None and (not isinstance(order, str) or not order or order in (*ids, time)):
            raise OptionError(f"order must name a column other than the id and time columns, got {order!r}")
        if time_unit is not None and time_unit not in UNITS_NS:
            raise OptionError(f"time_unit must be one of {sorted(UNITS_NS)} or None, got {time_unit!r}")
        if len(transforms) == 1 and isinstance(transforms[0], (list, tuple)):
            transforms = tuple(transforms[0])  # Derivation([t1, t2], ...) reads naturally too
        plan(None, transforms, ids, time)  # the order checks that need no frame
        object.__setattr__(self, "id", ids[0] if isinstance(id, str) else tuple(ids))
        object.__setattr__(self, "time", time)
        object.__setattr__(self, "unit", unit)
        object.__setattr__(self, "transforms", tuple(transforms))
        object.__setattr__(self, "description", description)
        object.__setattr__(self, "order", order)
        object.__setattr__(self, "time_unit", time_unit)

    # -------------------------------------------------------------- what it does
    @property
    def id_cols(self) -> list[str]:
        return as_id_list(self.id)

    def inputs(self) -> tuple[str, ...]:
        """Columns the input frame must have besides id and time (not made by an earlier transform)."""
        made: set[str] = set()
        need: dict[str, None] = {}
        for tr in self.transforms:
            for col in tr.inputs():
                if col not in made:
                    need[col] = None
            made.update(tr.outputs())
        return tuple(need)

    def tables(self) -> tuple[str, ...]:
        """Names of the side tables ``apply`` needs (``tables={name: frame}``), in order of first use.
        The derivation stores only these names and the columns read, never data."""
        return tuple(dict.fromkeys(use.name for tr in self.transforms for use in tr.tables()))

    def outputs(self) -> tuple[str, ...]:
        """Names of the columns ``apply`` adds, in order."""
        return tuple(name for tr in self.transforms for name in tr.outputs())

    def extend(self, *more: Transform | Derivation) -> Derivation:
        """A new derivation with more transforms (or the transforms of other derivations
        with the same panel declaration) after these ones."""
        added: list[Transform] = []
        for item in more:
            if isinstance(item, Derivation):
                if (item.id_cols, item.time, item.unit, item.order, item.time_unit) != \
                        (self.id_cols, self.time, self.unit, self.order, self.time_unit):
                    raise OptionError(
                        f"cannot extend a derivation of (id={self.id!r}, time={self.time!r}, unit={self.unit!r}) "
                        f"with one of (id={item.id!r}, time={item.time!r}, unit={item.unit!r})"
                    )
                added.extend(item.transforms)
            else:
                added.append(item)
        out = Derivation(*self.transforms, *added, id=self.id, time=self.time, unit=self.unit,
                         description=self.description, order=self.order, time_unit=self.time_unit)
        texts = [self._texts()]
        texts += [item._texts() if isinstance(item, Derivation) else ([""], [""]) for item in more]
        return out._with_texts([x for lab, _ in texts for x in lab], [x for _, note in texts for x in note])

    # -------------------------------------------------------------- labels and notes
    def described(self, column: str, *, label: str | None = None, note: str | None = None) -> Derivation:
        """A copy with a ``label`` (short text, at most 40 characters, one line, as an ADaM
        variable label) and/or a ``note`` (free text) on the transform that makes ``column``;
        ``None`` keeps what is there, ``""`` removes it.  Both are shown by :meth:`dictionary`
        (on every output of that transform), saved with the derivation and kept by ``extend``.

        >>> import panelfx as pfx
        >>> d = pfx.Derivation(pfx.baseline("sbp"), pfx.lag("sbp"), id="pid", time="day")
        >>> d = d.described("sbp_lag1", label="Systolic BP at previous visit", note="invented example")
        >>> d.dictionary()[["column", "label", "note"]]
                 column                          label               note
        0  sbp_baseline
        1      sbp_lag1  Systolic BP at previous visit  invented example
        """
        step = next((i for i, tr in enumerate(self.transforms) if column in tr.outputs()), None)
        if step is None:
            raise OptionError(f"column {column!r} is not made by this derivation (it makes: "
                              f"{', '.join(self.outputs()) or 'nothing'})", column=column)
        labels, notes = self._texts()
        if label is not None:
            labels[step] = check_label(label)
        if note is not None:
            notes[step] = check_note(note)
        return self._with_texts(labels, notes)

    @staticmethod
    def json_schema() -> dict[str, Any]:
        """The JSON Schema (draft 2020-12) of saved derivations, generated from the transform
        registry; the same as the file ``derivation.schema.json`` shipped in the package."""
        from ._derivation_schema import derivation_schema

        return derivation_schema()

    def _texts(self) -> tuple[list[str], list[str]]:
        n = len(self.transforms)
        return list(self.labels or [""] * n), list(self.notes or [""] * n)

    def _with_texts(self, labels: Sequence[str], notes: Sequence[str]) -> Derivation:
        """This derivation with those labels and notes (one per transform), in the normal form."""
        out = Derivation(*self.transforms, id=self.id, time=self.time, unit=self.unit,
                         description=self.description, order=self.order, time_unit=self.time_unit)
        if any(labels):
            object.__setattr__(out, "labels", tuple(labels))
        if any(notes):
            object.__setattr__(out, "notes", tuple(notes))
        return out

    @frames(result="added", tables="tables", passthrough=lambda f: type(f).__module__.startswith("dask."))
    def apply(self, frame: pd.DataFrame, tables: Mapping[str, pd.DataFrame] | None = None,
              threads: int | None = None, keep: Keep = "all", rows: Rows = "input",
              **dask_options: Any) -> pd.DataFrame:
        """``derive(frame, *transforms, id=, time=, unit=, tables=, keep=, rows=)``, with the
        provenance (this derivation, its data dictionary, and the ``rows`` and ``subjects`` of
        the frame it was applied to) in ``result.attrs["panelfx"]``.  Provenance already on the
        input is kept under ``"previous"``.

        Given a dask DataFrame, the result is a dask DataFrame, lazily (see
        :func:`panelfx.dask.apply`, which takes ``dask_options``)."""
        if type(frame).__module__.startswith("dask."):  # no import of dask unless it is in use
            from .dask import apply as apply_dask

            if threads is not None:
                raise OptionError("threads= does not apply to dask DataFrames: Dask's workers set the parallelism")
            if (keep, rows) != ("all", "input"):
                raise OptionError("keep= and rows= apply to pandas frames; on a dask frame select the columns "
                                  "of derivation.outputs() (rows come grouped by subject after its shuffle)")
            return apply_dask(self, frame, tables=tables, **dask_options)
        if dask_options:
            raise OptionError(f"options {sorted(dask_options)} apply to dask DataFrames only, got a "
                              f"{type(frame).__name__}")
        with counting() as counts:
            out = derive(frame, *self.transforms, id=self.id, time=self.time, unit=self.unit, order=self.order,
                         time_unit=self.time_unit, tables=tables, threads=threads, keep=keep, rows=rows)
        record: dict[str, Any] = {
            "derivation": self.to_dict(),
            "dictionary": _dictionary_records(self._dictionary_from_result(out, frame)),
            **counts,  # rows and subjects: a later derive on a subset of this result can tell (SubsetWarning)
        }
        previous = frame.attrs.get(ATTRS_KEY) if isinstance(frame.attrs, dict) else None
        if previous is not None:
            record["previous"] = previous
        out.attrs[ATTRS_KEY] = record
        return out

    # -------------------------------------------------------------- notebooks
    def _repr_html_(self) -> str:
        """Jupyter display: the panel declaration and the data dictionary, every cell HTML-escaped."""
        from ._display import derivation_html

        return derivation_html(self)

    def _repr_markdown_(self) -> str:
        """The same display as Markdown, for renderers without HTML."""
        from ._display import derivation_markdown

        return derivation_markdown(self)

    # -------------------------------------------------------------- data dictionary
    def dictionary(self, frame: pd.DataFrame | None = None,
                   tables: Mapping[str, pd.DataFrame] | None = None) -> pd.DataFrame:
        """One row per output column: ``column``, ``step`` (the transform's number, from 1),
        ``transform`` (type name), ``sources`` (the columns it reads besides id and time,
        comma-separated, side-table columns as ``labs.alt``; empty when it uses only id and time), ``description`` (the
        options in words), ``past_only``, ``dtype`` and ``time_unit``.

        ``past_only`` is True only when the transform is past-only *and* every derived
        column it reads is past-only too (a lag of a baseline can still see the future).

        ``dtype`` is the dtype of the applied result when ``frame`` is given (the
        derivation is applied to it; a sample of the input is usually enough, though
        integers can become floats where values are missing); without a frame it is
        missing (``None``), since most outputs keep or depend on the input's dtype.

        ``time_unit`` is the unit of outputs that carry one: durations (gaps, times since),
        rates (per unit of time) and areas (value x time): ``unit`` (default "D", days) for
        datetime times and declared numeric ones, else the time column's own units.  It is
        empty for outputs that carry no time unit (a carried value, a count).

        >>> import panelfx as pfx
        >>> d = pfx.Derivation(pfx.baseline("sbp"), pfx.lag("sbp_baseline"), id="pid", time="day")
        >>> d.dictionary()[["column", "step", "transform", "sources", "past_only"]]
                     column  step transform       sources  past_only
        0      sbp_baseline     1  baseline           sbp      False
        1  sbp_baseline_lag1     2       lag  sbp_baseline      False
        """
        if frame is not None:  # polars and pyarrow frames: the dtypes of their pandas form
            return self._dictionary_from_result(self.apply(to_pandas(frame), tables))
        if self.unit is not None or self.time_unit is not None:
            unit = _unit_words(self.unit or self.time_unit or "D")
        else:
            unit = f"{_unit_words('D')} for datetime times, else the units of {self.time!r}"
        return self._dictionary(dtypes={}, time_unit=unit)

    def _dictionary_from_result(self, result: pd.DataFrame, source: pd.DataFrame | None = None) -> pd.DataFrame:
        # the time column is read from the input when given (a keep="new" result does not have it)
        kind = time_kind(key_column(result if source is None else source, self.time))
        if kind == "number" and self.time_unit is None:
            unit = f"the units of {self.time!r}"
        else:
            unit = _unit_words(self.unit or self.time_unit or "D")
        return self._dictionary(dtypes={c: str(result[c].dtype) for c in self.outputs()}, time_unit=unit)

    def _dictionary(self, dtypes: Mapping[str, str], time_unit: str) -> pd.DataFrame:
        rows = []
        past: dict[str, bool] = {}
        labels, notes = self._texts()
        for step, tr in enumerate(self.transforms, start=1):
            sources = (*tr.inputs(), *(f"{u.name}.{c}" for u in tr.tables() for c in u.all_columns()))
            only_past = bool(tr.past_only) and all(past.get(c, True) for c in sources)
            outs = tr.outputs()
            kinds = tr.unit_kinds(self.time)
            for k, name in enumerate(outs, start=1):
                past[name] = only_past
                words = tr.describe() if len(outs) == 1 else f"{tr.describe()} [output {k} of {len(outs)}]"
                rows.append({
                    "column": name, "step": step, "transform": tr.type_name, "sources": ", ".join(sources),
                    "description": words, "past_only": only_past, "dtype": dtypes.get(name),
                    "time_unit": _unit_of(kinds[k - 1], time_unit, tr),
                    "label": labels[step - 1], "note": notes[step - 1],
                })
        return dictionary_frame(rows)

    # -------------------------------------------------------------- saving
    def to_dict(self) -> dict[str, Any]:
        """The saved form as plain Python values (what :meth:`to_json` writes)."""
        doc: dict[str, Any] = {
            "format": FORMAT,
            "version": VERSION,
            "description": self.description,
            "panel": {"id": self.id if isinstance(self.id, str) else list(self.id), "time": self.time,
                      "unit": self.unit},
            "transforms": [],
        }
        # written only when set, so files of panels without them read as before
        if self.order is not None:
            doc["panel"]["order"] = self.order
        if self.time_unit is not None:
            doc["panel"]["time_unit"] = self.time_unit
        for i, tr in enumerate(self.transforms):
            path = f"transforms[{i}]"
            options = {f.name: _plain(getattr(tr, f.name), f"{path}.options.{f.name}", tr)
                       for f in dataclasses.fields(tr) if f.init}
            entry: dict[str, Any] = {"type": tr.type_name, "options": options}
            if self.labels and self.labels[i]:  # written only when set: files without them read as before
                entry["label"] = self.labels[i]
            if self.notes and self.notes[i]:
                entry["note"] = self.notes[i]
            doc["transforms"].append(entry)
        return doc

    def to_json(self, indent: int | None = 2) -> str:
        """Plain, versioned JSON; keys in a fixed order so that saved files diff cleanly."""
        return json.dumps(self.to_dict(), indent=indent, ensure_ascii=False, allow_nan=False)

    @classmethod
    def from_dict(cls, doc: Any) -> Derivation:
        """Rebuild from the plain values of :meth:`to_dict`, checking every key and type."""
        _expect(doc, dict, "", "the file must hold a JSON object")
        _no_unknown(doc, ("format", "version", "description", "panel", "transforms"), "")
        if "format" not in doc:
            raise DerivationFileError(f"not a saved panelfx derivation: no 'format' key (expected {FORMAT!r})",
                                      path="format")
        if doc["format"] != FORMAT:
            raise DerivationFileError(f"not a saved panelfx derivation: format is {doc['format']!r}, "
                                      f"expected {FORMAT!r}", path="format")
        version = _required(doc, "version", "")
        if isinstance(version, bool) or not isinstance(version, int):
            raise DerivationFileError(f"must be an integer, got {version!r}", path="version")
        if version == 1:  # the same columns as when it was saved (see panelfx._upgrade)
            doc = {**doc, "transforms": upgrade_v1(doc.get("transforms"))}
        elif version != VERSION:
            newer = " (written by a newer panelfx: upgrade panelfx)" if version > VERSION else ""
            raise DerivationFileError(f"format version {version} is not supported; this panelfx reads version "
                                      f"{VERSION}{newer}", path="version")
        description = doc.get("description", "")
        _expect(description, str, "description", "must be a string")
        panel = _required(doc, "panel", "")
        _expect(panel, dict, "panel", "must be an object with keys id, time, unit")
        _no_unknown(panel, ("id", "time", "unit", "order", "time_unit"), "panel")
        id_ = _required(panel, "id", "panel")
        if isinstance(id_, list):
            if not id_ or not all(isinstance(c, str) and c for c in id_):
                raise DerivationFileError(f"must be a column name or a list of column names, got {_short(id_)}",
                                          path="panel.id")
            id_ = tuple(id_)
        else:
            _expect(id_, str, "panel.id", "must be a column name or a list of column names")
        time = _required(panel, "time", "panel")
        _expect(time, str, "panel.time", "must be a column name")
        unit = panel.get("unit")
        if unit is not None and (not isinstance(unit, str) or unit not in UNITS_NS):
            raise DerivationFileError(f"must be null or one of {sorted(UNITS_NS)}, got {_kind(unit)} ({_short(unit)})",
                                      path="panel.unit")
        order = panel.get("order")
        if order is not None:
            _expect(order, str, "panel.order", "must be null or a column name")
        time_unit = panel.get("time_unit")
        if time_unit is not None and (not isinstance(time_unit, str) or time_unit not in UNITS_NS):
            raise DerivationFileError(f"must be null or one of {sorted(UNITS_NS)}, got {_kind(time_unit)} "
                                      f"({_short(time_unit)})", path="panel.time_unit")
        items = _required(doc, "transforms", "")
        _expect(items, list, "transforms", "must be a list")
        transforms = [_transform_from(item, f"transforms[{i}]") for i, item in enumerate(items)]
        labels = [_text_from(item, "label", i, check_label) for i, item in enumerate(items)]
        notes = [_text_from(item, "note", i, check_note) for i, item in enumerate(items)]
        try:
            out = cls(*transforms, id=id_, time=time, unit=unit, description=description, order=order,
                      time_unit=time_unit)
        except PanelError as err:
            where = getattr(err, "position", None)
            raise DerivationFileError(str(err), path="panel" if where is None else f"transforms[{where}]") from None
        return out._with_texts(labels, notes) if any(labels) or any(notes) else out

    @classmethod
    def from_json(cls, text: str | bytes) -> Derivation:
        """Read a saved derivation; malformed input raises :class:`DerivationFileError`
        naming the key and its path in the file."""
        if isinstance(text, bytes):
            text = _decode(text)
        if not isinstance(text, str):
            raise TypeError(f"from_json expects a str, got {type(text).__name__}")
        # RFC 8259 section 8.1: a parser may ignore a byte order mark (Windows editors add one).
        text = text.removeprefix("\ufeff")
        if not text.strip():
            raise DerivationFileError("the file is empty")
        try:
            doc = json.loads(text, object_pairs_hook=_unique_keys, parse_constant=_no_constant,
                             parse_int=_parse_int, parse_float=_parse_float)
        except RecursionError:  # nesting deeper than Python's stack: find where, without recursion
            path, line, col = _deep_path(text)
            raise DerivationFileError(f"nested more than {MAX_DEPTH} levels deep (at line {line}, column {col})",
                                      path=path) from None
        except json.JSONDecodeError as err:
            # a string still open at the end of the text is reported where it starts
            cut = err.pos >= len(text.rstrip()) or err.msg.startswith("Unterminated string")
            hint = " (the file looks truncated)" if cut else ""
            raise DerivationFileError(
                f"not valid JSON: {err.msg} at line {err.lineno}, column {err.colno}{hint}") from None
        _check_tree(doc)
        return cls.from_dict(doc)

    def save(self, path: str | os.PathLike[str]) -> None:
        """Write :meth:`to_json` to ``path`` (a temporary file renamed into place, so a
        failed write never leaves a half-written file)."""
        write_atomic(path, lambda tmp: _write_text(tmp, self.to_json() + "\n"))

    @classmethod
    def load(cls, path: str | os.PathLike[str]) -> Derivation:
        """Read a derivation saved with :meth:`save`."""
        with open(path, "rb") as fh:
            data = fh.read()
        try:
            return cls.from_json(data)
        except DerivationFileError as err:
            raise DerivationFileError(f"{os.fspath(path)}: {err}", where=err.path) from None


# ---------------------------------------------------------------------------------- helpers


def dictionary_frame(rows: Sequence[Mapping[str, Any]]) -> pd.DataFrame:
    """The data dictionary as a frame, from its rows (also as recorded in ``attrs``)."""
    if not rows:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in DICTIONARY_COLUMNS})
    # records written before labels and notes existed have none
    return pd.DataFrame([{"label": "", "note": "", **row} for row in rows], columns=DICTIONARY_COLUMNS)


def _unit_of(kind: str | None, unit: str, tr: Transform) -> str:
    """The dictionary's time-unit entry of one output."""
    if kind is None:
        return ""
    if kind == "rate":
        return f"per {unit}"
    if kind == "area":
        return f"{getattr(tr, 'col', 'value')} x {unit}"
    return unit


def _unit_words(unit: str) -> str:
    return f"{unit} ({UNIT_WORDS.get(unit, unit)})"


def _dictionary_records(table: pd.DataFrame) -> list[dict[str, Any]]:
    return [{k: (v.item() if isinstance(v, np.generic) else v) for k, v in row.items()}
            for row in table.to_dict(orient="records")]


def _plain(value: Any, path: str, tr: Transform) -> Any:
    """An option as a plain JSON value, or a clear error saying why it cannot be saved."""
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, int):
        return value
    if isinstance(value, float):
        if not math.isfinite(value):
            raise OptionError(f"{path}: {value!r} cannot be saved as JSON (transform {tr.type_name})")
        return value
    if isinstance(value, (list, tuple)):
        return [_plain(v, f"{path}[{k}]", tr) for k, v in enumerate(value)]
    if isinstance(value, dict) and all(isinstance(k, str) for k in value):
        return {k: _plain(v, f"{path}.{k}", tr) for k, v in value.items()}
    raise OptionError(f"{path}: a {type(value).__name__} ({value!r}) cannot be saved as JSON (transform "
                      f"{tr.type_name}); give a plain value such as a number or a string like '90D'")


# ---------------------------------------------------------------------------------- parsing
# The JSON parser's hooks never raise: what cannot be an option (NaN, a huge number, a key
# given twice) is kept as a marker, and _check_tree then reports the first one with its path.

#: Deepest nesting of objects and lists a saved derivation may have; a file needs 5 or 6.
MAX_DEPTH = 32
#: Most digits an integer may have (int64 holds 19); Python refuses to parse beyond 4300.
MAX_DIGITS = 19
#: Longest value shown in an error message.
SHOW_CHARS = 60


@dataclasses.dataclass(frozen=True)
class _Unreadable:
    """A JSON token that cannot be an option value, kept so that the error can name its path."""

    text: str
    why: str

    def __repr__(self) -> str:
        return self.text if len(self.text) <= SHOW_CHARS else f"{self.text[:20]}...{self.text[-10:]}"


class _Duplicated(dict[str, Any]):
    """An object in which ``key`` appears more than once (the later values are dropped)."""

    key: str


def _unique_keys(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = dict(pairs)
    if len(out) == len(pairs):
        return out
    # RFC 8259 section 4: names SHOULD be unique; a second value for a key is a mistake
    dup = _Duplicated(out)
    seen: set[str] = set()
    for k, _ in pairs:
        if k in seen:
            dup.key = k
            break
        seen.add(k)
    return dup


def _no_constant(name: str) -> Any:
    return _Unreadable(name, f"{name} is not a JSON value (RFC 8259 has no NaN or Infinity): write a number or null")


def _parse_int(text: str) -> Any:
    if len(text.lstrip("-")) > MAX_DIGITS:
        return _Unreadable(text, f"an integer of {len(text.lstrip('-'))} digits is too large "
                                 f"(at most {MAX_DIGITS} digits)")
    return int(text)


def _parse_float(text: str) -> Any:
    value = float(text)
    if not math.isfinite(value):  # 1e999 would read as infinity
        return _Unreadable(text, f"the number {_short(text)} is too large to hold (it would be infinite)")
    return value


def _decode(data: bytes) -> str:
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise DerivationFileError("the file is not UTF-8 text: it starts with a UTF-16 byte order mark; "
                                  "save it as UTF-8 (RFC 8259 section 8.1)")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as err:
        line = data.count(b"\n", 0, err.start) + 1
        raise DerivationFileError(f"the file is not UTF-8 text ({err.reason} at byte {err.start}, line {line}); "
                                  "save it as UTF-8") from None


def _check_tree(doc: Any) -> None:
    """Refuse, with its path, the first marker left by the parser, a value nested deeper than
    :data:`MAX_DEPTH` or a string that cannot be written as UTF-8 (an escaped lone surrogate).
    Walks without recursion, in the order of the file."""
    stack: list[tuple[Any, str, int]] = [(doc, "", 0)]
    while stack:
        value, path, depth = stack.pop()
        if isinstance(value, _Unreadable):
            raise DerivationFileError(value.why, path=path)
        if isinstance(value, str):
            _text_ok(value, path)
        elif isinstance(value, (dict, list)):
            if depth >= MAX_DEPTH:
                raise DerivationFileError(f"nested more than {MAX_DEPTH} levels deep", path=path)
            if isinstance(value, _Duplicated):
                raise DerivationFileError(f"duplicate key {value.key!r} in an object", path=_join(path, value.key))
            if isinstance(value, dict):
                for k in value:
                    _text_ok(k, _join(path, "<key>"))
                items = [(v, _join(path, k), depth + 1) for k, v in value.items()]
            else:
                items = [(v, f"{path}[{i}]", depth + 1) for i, v in enumerate(value)]
            stack.extend(reversed(items))


def _text_ok(text: str, path: str) -> None:
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        raise DerivationFileError(f"the string {_short(text)} holds an escaped lone surrogate (\\ud800-\\udfff), "
                                  "which is not text", path=path) from None


def _deep_path(text: str) -> tuple[str, int, int]:
    """Where the nesting of ``text`` first goes deeper than :data:`MAX_DEPTH`: the path, line and
    column.  Only called when the parser ran out of stack, and stops there."""
    stack: list[list[Any]] = []  # per open container: its bracket and the current key or index
    key: Any = None
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c == '"':
            j = i + 1
            while True:  # the closing quote is one not escaped by an odd number of backslashes
                j = text.find('"', j)
                if j < 0:
                    j = n
                    break
                k = j
                while text[k - 1] == "\\":
                    k -= 1
                if (j - k) % 2 == 0:
                    break
                j += 1
            key = text[i + 1:j]
            i = j + 1
            continue
        if c in "[{":
            if len(stack) >= MAX_DEPTH:
                break
            stack.append([c, 0 if c == "[" else None])
        elif c in "]}" and stack:
            stack.pop()
        elif c == "," and stack and stack[-1][0] == "[":
            stack[-1][1] += 1
        elif c == ":" and stack:
            stack[-1][1] = key
        i += 1
    path = ""
    for bracket, at in stack:
        path = f"{path}[{at}]" if bracket == "[" else _join(path, str(at))
    line = text.count("\n", 0, i) + 1
    return path, line, i - (text.rfind("\n", 0, i) + 1) + 1


def _short(value: Any) -> str:
    """``repr`` of a value for an error message, cut to :data:`SHOW_CHARS`."""
    text = repr(value)
    return text if len(text) <= SHOW_CHARS else f"{text[:SHOW_CHARS - 15]} ... {text[-10:]}"


def _kind(value: Any) -> str:
    if value is None:
        return "null"
    return {bool: "true/false", int: "an integer", float: "a number", str: "a string", list: "a list",
            dict: "an object"}.get(type(value), type(value).__name__)


def _expect(value: Any, kind: type, path: str, rule: str) -> None:
    if not isinstance(value, kind):
        raise DerivationFileError(f"{rule}, got {_kind(value)} ({_short(value)})" if path else
                                  f"{rule}, got {_kind(value)}", path=path)


def _required(obj: dict[str, Any], key: str, path: str) -> Any:
    if key not in obj:
        raise DerivationFileError("missing key", path=_join(path, key))
    return obj[key]


def _no_unknown(obj: dict[str, Any], allowed: Iterable[str], path: str) -> None:
    allowed = list(allowed)
    for key in obj:
        if key not in allowed:
            raise DerivationFileError(f"unknown key (expected one of {allowed})", path=_join(path, key))


def _join(path: str, key: str) -> str:
    return f"{path}.{key}" if path else key


def check_label(label: Any) -> str:
    """A transform's label: one line of at most :data:`LABEL_CHARS` characters."""
    if not isinstance(label, str):
        raise OptionError(f"label must be a string, got {_kind(label)} ({_short(label)})")
    if len(label) > LABEL_CHARS:
        raise OptionError(f"label must be at most {LABEL_CHARS} characters (as an ADaM variable label), got "
                          f"{len(label)}: {_short(label)}; put longer text in note=")
    if not label.isprintable():
        raise OptionError(f"label must be one line of printable text, got {_short(label)}")
    return label


def check_note(note: Any) -> str:
    """A transform's note: any text."""
    if not isinstance(note, str):
        raise OptionError(f"note must be a string, got {_kind(note)} ({_short(note)})")
    return note


def _text_from(item: dict[str, Any], key: str, i: int, check: Any) -> str:
    if key not in item:
        return ""
    try:
        return str(check(item[key]))
    except OptionError as err:
        raise DerivationFileError(str(err), path=f"transforms[{i}].{key}") from None


def _transform_from(item: Any, path: str) -> Transform:
    _expect(item, dict, path, "each transform must be an object with keys type and options")
    _no_unknown(item, ("type", "options", "label", "note"), path)
    type_name = _required(item, "type", path)
    _expect(type_name, str, f"{path}.type", "must be the name of a transform")
    cls = REGISTRY.get(type_name)
    if cls is None:
        raise DerivationFileError(f"unknown transform {type_name!r} (known: {sorted(REGISTRY)})", path=f"{path}.type")
    options = item.get("options", {})
    _expect(options, dict, f"{path}.options", "must be an object")
    fields = {f.name: f for f in dataclasses.fields(cls) if f.init}
    hints = _hints(cls)
    kwargs: dict[str, Any] = {}
    for key, value in options.items():
        where = f"{path}.options.{key}"
        if key not in fields:
            raise DerivationFileError(f"unknown option of transform {type_name!r} (options: {list(fields)})",
                                      path=where)
        kwargs[key] = _convert(value, hints.get(key, Any), where)
    missing = [name for name, f in fields.items() if name not in kwargs
               and f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING]
    if missing:
        raise DerivationFileError(f"missing option of transform {type_name!r}", path=f"{path}.options.{missing[0]}")
    try:
        return cls(**kwargs)
    except PanelError as err:
        # The transform's own rules ("periods must be a non-zero integer, got 0"): point at the option.
        message = str(err)
        named = next((k for k in kwargs if message.startswith(f"{k} ") or message.startswith(f"{k}=")), None)
        raise DerivationFileError(f"{message} (transform {type_name!r})",
                                  path=f"{path}.options.{named}" if named else f"{path}.options") from None
    except (TypeError, ValueError) as err:
        raise DerivationFileError(f"transform {type_name!r} rejects its options: {err}",
                                  path=f"{path}.options") from None


#: Resolved annotations per transform class (see _hints).
_HINTS: dict[type, dict[str, Any]] = {}


def _hints(cls: type) -> dict[str, Any]:
    """Field annotations resolved in the transform's own module (never from the file).
    Annotations that cannot be resolved are left to the transform's validation.
    Resolved once per class: resolving them for every transform of a file was most of
    the time a large file took to load."""
    if cls not in _HINTS:
        try:
            _HINTS[cls] = typing.get_type_hints(cls)
        except Exception:  # noqa: BLE001 - e.g. a name imported only for type checkers
            _HINTS[cls] = {}
    return _HINTS[cls]


_NoneType = type(None)


def _convert(value: Any, hint: Any, path: str) -> Any:
    """Check a JSON value against a field annotation; JSON lists become tuples where the
    annotation says tuple (frozen transforms must stay hashable)."""
    ok, out = _match(value, hint)
    if not ok:
        raise DerivationFileError(f"must be {_describe_hint(hint)}, got {_kind(value)} ({_short(value)})", path=path)
    return out


def _match(value: Any, hint: Any) -> tuple[bool, Any]:
    if hint is Any or hint is object:
        return True, value
    if hint is None or hint is _NoneType:
        return value is None, value
    origin = typing.get_origin(hint)
    args = typing.get_args(hint)
    if origin is Union or (hasattr(types, "UnionType") and isinstance(hint, types.UnionType)):
        for arg in args:
            ok, out = _match(value, arg)
            if ok:
                return True, out
        return False, value
    if origin is Literal:
        return any(value == a and type(value) is type(a) for a in args), value
    if hint is bool:
        return isinstance(value, bool), value
    if hint is int:
        return isinstance(value, int) and not isinstance(value, bool), value
    if hint is float:  # an int is a fine float (JSON writes 30.0 as 30.0, but people write 30)
        return isinstance(value, (int, float)) and not isinstance(value, bool), value
    if hint is str:
        return isinstance(value, str), value
    seq = origin or hint
    if seq in (list, tuple, Sequence, typing.Sequence) or (isinstance(seq, type) and seq.__name__ == "Sequence"):
        if not isinstance(value, list):
            return False, value
        if origin is tuple and args and not (len(args) == 2 and args[1] is Ellipsis):
            if len(args) != len(value):
                return False, value
            item_hints = list(args)
        else:
            item_hints = [args[0] if args else Any] * len(value)
        items = []
        for v, h in zip(value, item_hints):
            ok, out = _match(v, h)
            if not ok:
                return False, value
            items.append(out)
        return True, (list(items) if seq is list else tuple(items))
    if seq in (dict, Mapping, typing.Mapping):
        if not isinstance(value, dict):
            return False, value
        vh = args[1] if len(args) == 2 else Any
        out = {}
        for k, v in value.items():
            ok, conv = _match(v, vh)
            if not ok:
                return False, value
            out[k] = conv
        return True, out
    return True, value  # an annotation we do not know: the transform's validation decides


def _describe_hint(hint: Any) -> str:
    if hint is None or hint is _NoneType:
        return "null"
    origin = typing.get_origin(hint)
    if origin is Union or (hasattr(types, "UnionType") and isinstance(hint, types.UnionType)):
        return " or ".join(_describe_hint(a) for a in typing.get_args(hint))
    if origin is Literal:
        return "one of " + ", ".join(repr(a) for a in typing.get_args(hint))
    names = {bool: "true or false", int: "an integer", float: "a number", str: "a string"}
    if hint in names:
        return names[hint]
    args = typing.get_args(hint)
    if origin is tuple and args and not (len(args) == 2 and args[1] is Ellipsis):
        return f"a list of {len(args)} ({', '.join(_describe_hint(a) for a in args)})"
    if origin in (list, tuple) or (origin is not None and getattr(origin, "__name__", "") == "Sequence"):
        return f"a list of {_describe_hint(args[0])} values" if args else "a list"
    if origin is dict:
        return "an object"
    return str(hint)


# ---------------------------------------------------------------------------------- files


def _write_text(path: str, text: str) -> None:
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(text)


#: Suffix of the temporary files :func:`write_atomic` makes (``.<target name>.<random>`` + this),
#: by which the command line recognises and sweeps the leftovers of a killed run.
TMP_SUFFIX = ".panelfx-tmp"


def write_atomic(path: str | os.PathLike[str], write: Any) -> None:
    """Call ``write(tmp)`` on a temporary file beside ``path``, then rename it over ``path``.

    On any failure (including Ctrl-C) the temporary file is removed and ``path`` is left
    as it was, so a failed run never replaces a good file with a half-written one.
    """
    target = os.path.abspath(os.fspath(path))
    folder, base = os.path.split(target)
    fd, tmp = tempfile.mkstemp(prefix=f".{base}.", suffix=TMP_SUFFIX, dir=folder)
    os.close(fd)
    try:
        write(tmp)
        if os.path.exists(target):
            try:  # keep the permissions of the file being replaced
                os.chmod(tmp, os.stat(target).st_mode & 0o7777)
            except OSError:
                pass
        else:
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.remove(tmp)
        except OSError:
            pass
        raise
