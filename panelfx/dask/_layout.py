"""Putting whole subjects in each partition: hash shuffle, or a check of the caller's partitions.

Two ways to a frame whose every partition holds whole subjects:

- **shuffle** (the default): each row gets the stable hash of its id
  (:func:`panelfx._partition.subject_hash`, column :data:`HASH`) and Dask's own shuffle
  moves rows by it.  Side tables are shuffled by the same hash into the same number of
  partitions, so partition *i* of a table holds the records of the subjects of partition
  *i* of the frame (Dask maps equal values to the same partition number in every frame).
- **declared whole** (``whole_subjects=True``): no shuffle.  Each partition reports the
  hashes of its subjects; a cheap reduction finds any hash seen in two partitions and every
  partition's task then raises :class:`~panelfx.errors.SplitSubjectError` naming example
  ids (or, with ``if_split="shuffle"``, the check runs at once and the frame is shuffled
  when it fails).  Side tables are moved to the partition that holds each of their
  subjects (an exact range partitioning on that partition number).

Row order: a shuffle returns each partition's rows in no documented order.  With
``row_order="input"`` every row carries its number (:data:`ROW`: input partition and
position) through the work and an exact range partitioning on it puts the rows back in
the caller's partitions and order, with the caller's divisions.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import dask
import dask.dataframe as dd
import numpy as np
import pandas as pd

from .._partition import ROW_BITS, id_kind, subject_hash
from ..errors import OptionError, SplitSubjectError

__all__ = ["HASH", "ROW", "Layout", "arrange", "restore_order", "find_split", "SHOW"]

#: Helper columns carried through the work and dropped from every result.
HASH = "__panelfx_hash"
ROW = "__panelfx_row"
INDEX = "__panelfx_index"
TARGET = "__panelfx_target"
PART = "__panelfx_partition"

#: How many split subjects the error names.
SHOW = 5


class Layout:
    """A frame whose partitions hold whole subjects (with :data:`HASH`, and :data:`ROW` when
    asked), its side tables partitioned alike, and the lazy split check (``None``: none needed)."""

    def __init__(self, frame: dd.DataFrame, tables: dict[str, dd.DataFrame], verdict: Any, shuffled: bool) -> None:
        self.frame, self.tables, self.verdict, self.shuffled = frame, tables, verdict, shuffled


# ----------------------------------------------------------------------------------- per partition
def add_keys(part: pd.DataFrame, id_cols: Sequence[str], rows: bool, partition_info: Any = None) -> pd.DataFrame:
    """The partition with its rows' subject hashes (and row numbers)."""
    extra: dict[str, Any] = {HASH: subject_hash(part, id_cols)}
    if rows:
        number = int(partition_info["number"]) if partition_info else 0
        extra[ROW] = (np.int64(number) << np.int64(ROW_BITS)) | np.arange(len(part), dtype=np.int64)
    out = part.copy(deep=False)
    for k, v in extra.items():
        out[k] = v
    return out


def report(part: pd.DataFrame, id_cols: Sequence[str], partition_info: Any = None) -> pd.DataFrame:
    """One row per subject of the partition: its hash, the partition number and its id."""
    h = part[HASH].to_numpy()
    _, first = np.unique(h, return_index=True)
    out = part[list(id_cols)].iloc[first].reset_index(drop=True)
    out[HASH] = h[first]
    out[PART] = int(partition_info["number"]) if partition_info else 0
    return out


def find_split(*reports: pd.DataFrame) -> dict[str, Any] | None:
    """The subjects seen in more than one partition (count, first ids, partitions), or None."""
    hashes = np.concatenate([r[HASH].to_numpy(dtype=np.uint64) for r in reports]) if reports else np.zeros(0, "u8")
    if len(hashes) == len(np.unique(hashes)):
        return None
    both = pd.concat(reports, ignore_index=True)
    seen = both[HASH].duplicated(keep=False).to_numpy()
    split = both.loc[seen]
    id_cols = [c for c in both.columns if c not in (HASH, PART)]
    first = split.drop_duplicates(HASH).head(SHOW)
    ids = [r[0] if len(r) == 1 else tuple(r) for r in first[id_cols].itertuples(index=False, name=None)]
    parts = sorted(split.loc[split[HASH] == first[HASH].iloc[0], PART].tolist())
    return {"count": int(split[HASH].nunique()), "ids": ids, "partitions": parts,
            "id": id_cols[0] if len(id_cols) == 1 else id_cols}


def raise_if_split(verdict: dict[str, Any] | None) -> None:
    if verdict is None:
        return
    count, ids = verdict["count"], verdict["ids"]
    shown = ", ".join(repr(i) for i in ids) + (" ..." if count > len(ids) else "")
    raise SplitSubjectError(
        f"{count} subject(s) have rows in more than one partition, but whole_subjects=True declares that each "
        f"partition holds whole subjects (per-partition results would be wrong); first ids: [{shown}]; the first "
        f"is in partitions {verdict['partitions']}. Pass whole_subjects=False (shuffle by subject) or "
        f"if_split='shuffle'.",
        column=None, count=count, ids=ids, partitions=verdict["partitions"])


def make_router(*reports: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Sorted subject hashes of the frame and the partition that holds each."""
    if not reports:
        return np.zeros(0, np.uint64), np.zeros(0, np.int64)
    h = np.concatenate([r[HASH].to_numpy(dtype=np.uint64) for r in reports])
    p = np.concatenate([r[PART].to_numpy(dtype=np.int64) for r in reports])
    order = np.argsort(h, kind="stable")
    return h[order], p[order]


def route(part: pd.DataFrame, router: tuple[np.ndarray, np.ndarray], n: int) -> pd.DataFrame:
    """A side table's rows with the partition number of their subject (or any, for subjects
    the frame does not have), and its index kept as a column."""
    hashes, parts = router
    h = part[HASH].to_numpy(dtype=np.uint64)
    at = np.minimum(np.searchsorted(hashes, h), max(len(hashes) - 1, 0))
    found = hashes[at] == h if len(hashes) else np.zeros(len(h), dtype=bool)
    target = np.where(found, parts[at] if len(parts) else 0, (h % np.uint64(max(n, 1))).astype(np.int64))
    out = part.rename_axis(INDEX).reset_index()
    out[TARGET] = target.astype(np.int64)
    return out


def unroute(part: pd.DataFrame, index_name: Any) -> pd.DataFrame:
    """Undo :func:`route`: the caller's index back, the partition number dropped."""
    return part.set_index(INDEX).rename_axis(index_name)


# ----------------------------------------------------------------------------------- whole frames
def _keyed(ddf: dd.DataFrame, id_cols: Sequence[str], rows: bool) -> dd.DataFrame:
    meta = add_keys(ddf._meta, id_cols, rows)
    return ddf.map_partitions(add_keys, id_cols, rows, meta=meta, token="panelfx-hash", enforce_metadata=False)


def _check_names(ddf: dd.DataFrame, what: str) -> None:
    taken = [c for c in (HASH, ROW, INDEX, TARGET, PART) if c in ddf.columns or c == ddf.index.name]
    if taken:
        raise OptionError(f"{what} has a column named {taken[0]!r}, which panelfx.dask uses for its own work")


def _as_dask(table: Any, name: str) -> dd.DataFrame:
    if isinstance(table, dd.DataFrame):
        return table
    if isinstance(table, pd.DataFrame):
        return dd.from_pandas(table, npartitions=1, sort=False)
    raise OptionError(f"tables[{name!r}] must be a pandas or dask DataFrame, got {type(table).__name__}")


def _check_table_ids(frame_meta: pd.DataFrame, table: dd.DataFrame, name: str, id_cols: Sequence[str]) -> None:
    missing = [c for c in id_cols if c not in table.columns]
    if missing:
        from ..errors import MissingColumnError

        raise MissingColumnError(f"id column {missing[0]!r} is not in tables[{name!r}]", column=missing[0], count=1)
    for c in id_cols:
        a, b = id_kind(frame_meta[c].dtype), id_kind(table._meta[c].dtype)
        if a != b:
            raise OptionError(f"id column {c!r} holds {a} values in the frame but {b} values in tables[{name!r}]: "
                              f"its rows would never meet the frame's subjects; convert one of them")


def arrange(
    ddf: dd.DataFrame,
    id_cols: Sequence[str],
    *,
    whole_subjects: bool,
    if_split: str,
    npartitions: int | None,
    rows: bool,
    tables: Mapping[str, Any] | None,
) -> Layout:
    """See the module docstring."""
    if not isinstance(ddf, dd.DataFrame):
        raise TypeError(f"expected a dask DataFrame, got {type(ddf).__name__}")
    if if_split not in ("raise", "shuffle"):
        raise OptionError(f"if_split must be 'raise' or 'shuffle', got {if_split!r}")
    if npartitions is not None and (isinstance(npartitions, bool) or not isinstance(npartitions, int)
                                    or npartitions < 1):
        raise OptionError(f"npartitions must be a positive integer or None, got {npartitions!r}")
    _check_names(ddf, "the frame")
    from .._panel import require_columns

    require_columns(ddf._meta, id_cols, "id")
    tables = dict(tables or {})
    side = {}
    for name, t in tables.items():
        t = _as_dask(t, name)
        _check_names(t, f"tables[{name!r}]")
        _check_table_ids(ddf._meta, t, name, id_cols)
        side[name] = t
    keyed = _keyed(ddf, id_cols, rows)

    if whole_subjects:
        if npartitions is not None and npartitions != ddf.npartitions:
            raise OptionError(f"npartitions={npartitions} asks for a shuffle, but whole_subjects=True keeps the "
                              f"frame's {ddf.npartitions} partitions")
        reports = keyed.map_partitions(report, id_cols, meta=report(keyed._meta, id_cols), token="panelfx-subjects",
                                       enforce_metadata=False).to_delayed()
        verdict = dask.delayed(find_split, pure=True)(*reports, dask_key_name=f"panelfx-split-check-{keyed._name}")
        router = dask.delayed(make_router, pure=True)(*reports, dask_key_name=f"panelfx-router-{keyed._name}")
        if if_split == "shuffle":
            verdict_now, router_now = dask.compute(verdict, router)
            if verdict_now is None:
                return Layout(keyed, {k: _route(t, id_cols, router_now, keyed.npartitions) for k, t in side.items()},
                              None, shuffled=False)
            # Split subjects found: shuffle as if whole_subjects had not been declared.
        else:
            return Layout(keyed, {k: _route(t, id_cols, router, keyed.npartitions) for k, t in side.items()},
                          verdict, shuffled=False)

    n = npartitions or ddf.npartitions
    shuffled = keyed.shuffle(on=HASH, npartitions=n)
    tabs = {k: _keyed(t, id_cols, False).shuffle(on=HASH, npartitions=n) for k, t in side.items()}
    return Layout(shuffled, tabs, None, shuffled=True)


def _route(table: dd.DataFrame, id_cols: Sequence[str], router: Any, n: int) -> dd.DataFrame:
    """The table moved so that partition i holds the records of the frame's partition i's subjects."""
    keyed = _keyed(table, id_cols, False)
    routed = keyed.map_partitions(route, router, n, meta=route(keyed._meta, make_router(), n),
                                  token="panelfx-route", enforce_metadata=False)
    placed = to_partitions(routed, TARGET, list(range(n)) + [n - 1])
    name = table._meta.index.name
    return placed.map_partitions(unroute, name, meta=unroute(placed._meta, name), token="panelfx-unroute",
                                 enforce_metadata=False, clear_divisions=True)


def to_partitions(ddf: dd.DataFrame, key: str, divisions: list[int]) -> dd.DataFrame:
    """Rows moved to the partitions that ``divisions`` give their integer ``key`` (exact, no
    sampling), sorted by it within each; ``key`` becomes the index."""
    return ddf.set_index(key, divisions=divisions)


def restore_order(result: dd.DataFrame, original: dd.DataFrame) -> dd.DataFrame:
    """``result`` (rows carrying :data:`ROW`) back in ``original``'s partitions, order and divisions."""
    n = original.npartitions
    last = ((n - 1) << ROW_BITS) | ((1 << ROW_BITS) - 1)
    divisions = [p << ROW_BITS for p in range(n)] + [last]
    index_name = original._meta.index.name
    keep = result.map_partitions(_index_to_column, meta=_index_to_column(result._meta), token="panelfx-keep-index",
                                 enforce_metadata=False)
    placed = to_partitions(keep, ROW, divisions)
    meta = _column_to_index(placed._meta, index_name, original._meta.index.dtype)
    back = placed.map_partitions(_column_to_index, index_name, original._meta.index.dtype, meta=meta,
                                 token="panelfx-restore-order", enforce_metadata=False, clear_divisions=True)
    if original.known_divisions:
        return dd.from_delayed(back.to_delayed(), meta=meta, divisions=original.divisions, verify_meta=False)
    return back


def _index_to_column(part: pd.DataFrame) -> pd.DataFrame:
    return part.rename_axis(INDEX).reset_index()


def _column_to_index(part: pd.DataFrame, name: Any = None, dtype: Any = None) -> pd.DataFrame:
    out = part.set_index(INDEX).rename_axis(name)
    if dtype is not None and out.index.dtype != dtype:
        out.index = out.index.astype(dtype)
    return out

