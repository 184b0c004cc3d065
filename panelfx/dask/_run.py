"""The task that runs on each partition: panelfx's own engine on whole subjects.

A derivation travels to the workers as its saved form (the plain JSON of
:meth:`panelfx.Derivation.to_json`), never as pickled code, and is parsed once per worker
process (:func:`parse` is cached), however many partitions the process works on.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import pandas as pd

from .._schema import conform
from .._subset import quiet
from ..derivation import Derivation
from ..derive import derive as _derive
from ..errors import PanelError
from ._layout import HASH, ROW, raise_if_split

__all__ = ["parse", "derive_spec", "run_partition", "check_part", "Call"]


@functools.lru_cache(maxsize=32)
def parse(spec: str) -> Derivation:
    """A saved derivation, parsed once per process (the JSON text is the cache key)."""
    return Derivation.from_json(spec)


def derive_spec(frame: pd.DataFrame, spec: str, tables: Mapping[str, pd.DataFrame] | None = None) -> pd.DataFrame:
    """``panelfx.derive`` with the transforms and panel of the saved derivation ``spec``."""
    d = parse(spec)
    with quiet():  # a partition holds whole subjects: no rows were removed inside them
        return _derive(frame, *d.transforms, id=d.id, time=d.time, unit=d.unit, order=d.order,
                       time_unit=d.time_unit, tables=dict(tables) if tables else None)


def check_part(frame: pd.DataFrame, **options: Any) -> pd.DataFrame:
    """``panelfx.check`` on one partition, without the row-order note (rows of a partitioned
    frame have no single order, and after a shuffle the note says nothing about the caller's)."""
    from ..check import check

    report = check(frame, **options)
    return report.loc[report["problem"] != "not_in_order"].reset_index(drop=True)


class Call:
    """``func(frame, *args, **kwargs)`` as a picklable value (the frame comes first)."""

    def __init__(self, func: Callable[..., pd.DataFrame], args: Sequence[Any], kwargs: Mapping[str, Any]) -> None:
        self.func, self.args, self.kwargs = func, tuple(args), dict(kwargs)

    def __call__(self, frame: pd.DataFrame, **extra: Any) -> pd.DataFrame:
        return self.func(frame, *self.args, **self.kwargs, **extra)


def run_partition(
    part: pd.DataFrame,
    *rest: Any,
    call: Callable[..., pd.DataFrame],
    table_names: Sequence[str],
    keep_row: bool,
    schema: pd.DataFrame,
    partition_info: Any = None,
) -> pd.DataFrame:
    """``call(part)`` on one partition of whole subjects (side tables, when
    any, as ``tables={name: partition}``), its result held to the predicted ``schema`` (Dask's meta).

    ``rest`` is the table partitions then the split check's verdict."""
    *tables, verdict = rest
    raise_if_split(verdict)
    frame = part.drop(columns=[c for c in (HASH, ROW) if c in part.columns])
    extra: dict[str, Any] = {}
    if table_names:
        extra["tables"] = {name: t.drop(columns=[HASH]) for name, t in zip(table_names, tables)}
    try:
        out = call(frame, **extra)
    except PanelError as err:
        if partition_info is not None:
            # The counts and ids of the message are this partition's: say so.
            where = (f" (in partition {partition_info['number']} of the dask frame: the counts and ids are "
                     f"that partition's)")
            err.message = f"{err.message}{where}"
            err.args = (err.message, *err.args[1:])
        raise
    if keep_row:
        out = out.copy(deep=False)
        out[ROW] = part[ROW].to_numpy()
    return conform(out, schema)
