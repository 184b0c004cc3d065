"""Units of nested levels (region > clinic > subject): one integer code per row and level.

Shared by :func:`panelfx.variance_components` and the nested form of
:func:`panelfx.within_between`.  Codes are built once per level with ``pandas.factorize``
(any dtype: text, integers, categoricals, Arrow), then combined down the chain of levels
with integer arithmetic: no loop over units or rows.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd

from ._panel import require_columns
from .errors import NestingError, NullKeyError, OptionError, rows_message

#: How level codes identify units.
CODES = ("within_parent", "unique")
Codes = Literal["within_parent", "unique"]


def check_levels(levels: Any, what: str = "levels", *, allow_empty: bool = False) -> list[str]:
    """``levels`` as a list of distinct column names, outermost first."""
    if isinstance(levels, str):
        levels = [levels]
    if isinstance(levels, (bytes, dict)) or not isinstance(levels, (list, tuple)) \
            or not all(isinstance(c, str) and c for c in levels):
        raise OptionError(f"{what} must be a list of column names, outermost first, got {levels!r}")
    if not levels and not allow_empty:
        raise OptionError(f"{what} must name at least one column")
    if len(set(levels)) != len(levels):
        raise OptionError(f"{what} names a column twice: {list(levels)!r}")
    return list(levels)


def level_codes(frame: pd.DataFrame, levels: Sequence[str], codes: str = "within_parent") -> list[np.ndarray]:
    """Per level (outermost first): int64 unit codes of every row, in the frame's row order.

    ``codes="within_parent"``: a unit is the chain of codes down to it, so clinic "C1" of
    region "North" and clinic "C1" of region "South" are two clinics.  ``"unique"``: a code
    names the same unit wherever it appears, and a unit seen under two parents is a
    :class:`~panelfx.errors.NestingError` naming the level, the count and the first codes.
    A missing code is a :class:`~panelfx.errors.NullKeyError` naming the first row labels.
    """
    if codes not in CODES:
        raise OptionError(f"codes must be one of {list(CODES)}, got {codes!r}")
    require_columns(frame, list(levels), "level")
    out: list[np.ndarray] = []
    parent: np.ndarray | None = None
    for col in levels:
        own, uniques = pd.factorize(frame[col], use_na_sentinel=True)
        own = np.asarray(own, dtype=np.int64)
        if (own < 0).any():
            where = np.flatnonzero(own < 0)
            labels = list(frame.index[where[:5]])
            raise NullKeyError(rows_message("missing level code", col, len(where), labels, noun="row labels"),
                               column=col, count=len(where), ids=labels)
        if parent is None:
            unit = own
        elif codes == "within_parent":
            # (parent, own) pairs numbered in order of first appearance
            unit = np.asarray(pd.factorize(parent * (int(own.max()) + 1) + own)[0], dtype=np.int64)
        else:
            pairs = np.unique(own * (int(parent.max()) + 1) + parent)
            n_parents = np.bincount(pairs // (int(parent.max()) + 1), minlength=len(uniques))
            bad = np.flatnonzero(n_parents > 1)
            if len(bad):
                ids = pd.Index(uniques).take(bad[:5]).tolist()
                raise NestingError(
                    rows_message(f"{len(bad)} unit(s) of level {col!r} appear under more than one "
                                 f"{levels[len(out) - 1]!r} (codes='unique' says a code names one unit; "
                                 f"use codes='within_parent' if codes restart within each parent)",
                                 col, int(np.isin(own, bad).sum()), ids, noun="codes"),
                    column=col, count=len(bad), ids=ids)
            unit = own
        out.append(unit)
        parent = unit
    return out


def compact(codes: np.ndarray) -> tuple[np.ndarray, int]:
    """Codes renumbered 0..k-1 (units with no row left vanish), and k."""
    uniq, inverse = np.unique(codes, return_inverse=True)
    return inverse.astype(np.int64).reshape(-1), len(uniq)


def parents(child: np.ndarray, parent: np.ndarray, n_child: int) -> np.ndarray:
    """The parent unit of each child unit (one entry per child), from per-row codes that nest."""
    out = np.zeros(n_child, dtype=np.int64)
    out[child] = parent
    return out


__all__ = ["CODES", "Codes", "check_levels", "level_codes", "compact", "parents"]
