"""Does the frame given to ``derive`` look like a panel with rows removed inside subjects?

Deriving on a filtered frame (``df[df.sbp.notna()]``, a row-level train/test split) gives
different lags, changes and windows than deriving on the whole panel and filtering after:
the removed occasions are skipped.  ``derive`` warns (:class:`~panelfx.SubsetWarning`)
when it can *see* that this happened, by two rules chosen for few false alarms:

1. **provenance**: ``frame.attrs["panelfx"]`` (written by ``Derivation.apply`` and carried
   along by pandas through filtering) says the frame it came from had more rows, and the
   same number of subjects is still there (so rows went, not whole subjects);
2. **index**: the index is integer, strictly increasing, not a ``RangeIndex`` (a default
   index after a row filter), the frame holds three or more subjects with several rows, the
   subjects' runs of labels do not interleave (the panel it was cut from was grouped by
   subject, as most files are), and some subject's run has a hole: a label missing between
   two of its rows (in steps of the labels' common step: 100, 103, 106 has none).

Whole subjects removed (a site, a treatment arm, a ``GroupKFold`` fold) never trip rule 2:
each remaining subject keeps an unbroken run.  Rows dropped at the start or end of
subjects' follow-up (a data cut) do not either.  A frame cut from a shuffled panel cannot
be told from one cut by subject, so the index rule stays silent there.
"""

from __future__ import annotations

import contextlib
import os
import sys
import warnings
from collections.abc import Iterator
from contextvars import ContextVar
from typing import Any

import numpy as np
import pandas as pd

from .errors import SubsetWarning, _fmt_ids

__all__ = ["quiet", "counting", "after_panel"]

_QUIET: ContextVar[bool] = ContextVar("panelfx_subset_quiet", default=False)
_COUNTS: ContextVar[dict[str, int] | None] = ContextVar("panelfx_subset_counts", default=None)

#: Key of the provenance record in ``DataFrame.attrs`` (``Derivation.apply`` writes it; Parquet metadata too).
ATTRS_KEY = "panelfx"

#: Subjects with two or more rows the index rule needs before it judges (few rows may look grouped by chance).
MIN_RUNS = 3

SILENCE = "warnings.simplefilter('ignore', pfx.SubsetWarning)"


@contextlib.contextmanager
def quiet() -> Iterator[None]:
    """No subset warning inside: for panelfx's own calls that cut frames on purpose
    (``assert_past_only`` cuts later occasions; a Dask partition holds whole subjects)."""
    token = _QUIET.set(True)
    try:
        yield
    finally:
        _QUIET.reset(token)


@contextlib.contextmanager
def counting() -> Iterator[dict[str, int]]:
    """Collect the rows and subjects of the panel ``derive`` builds inside (for ``Derivation.apply``'s
    provenance record), without a second pass over the ids."""
    counts: dict[str, int] = {}
    token = _COUNTS.set(counts)
    try:
        yield counts
    finally:
        _COUNTS.reset(token)


def after_panel(frame: pd.DataFrame, panel: Any) -> None:
    """Called by ``derive`` once the panel is built: record counts, warn on a visible subset."""
    counts = _COUNTS.get()
    if counts is not None:
        counts.update(rows=int(panel.n), subjects=int(panel.n_subjects))
    if _QUIET.get():
        return
    found = _from_provenance(frame, panel) or _from_index(frame, panel)
    if found is not None:
        warnings.warn(found, stacklevel=_outside_level())


def _from_provenance(frame: pd.DataFrame, panel: Any) -> SubsetWarning | None:
    record = frame.attrs.get(ATTRS_KEY) if isinstance(frame.attrs, dict) else None
    if not isinstance(record, dict):
        return None
    rows, subjects = record.get("rows"), record.get("subjects")
    if not isinstance(rows, int) or not isinstance(subjects, int):
        return None
    if rows <= panel.n or subjects != panel.n_subjects:
        return None  # not fewer rows, or whole subjects went (a split by subject is fine)
    missing = rows - panel.n
    return SubsetWarning(
        f"the frame has {panel.n} rows of {subjects} subjects, but its panelfx provenance (frame.attrs) says it "
        f"came from {rows} rows of the same {subjects} subjects: {missing} rows were removed inside subjects, and "
        f"lags, changes and windows derived now skip them. Derive on the whole panel, then filter or split by "
        f"subject; to silence: {SILENCE}",
        count=missing,
    )


def _from_index(frame: pd.DataFrame, panel: Any) -> SubsetWarning | None:
    index = frame.index
    if isinstance(index, (pd.RangeIndex, pd.MultiIndex)):
        return None
    if not isinstance(index.dtype, np.dtype) or index.dtype.kind not in "iu":
        return None
    labels = index.to_numpy()
    if labels.dtype.kind == "u":
        if labels.max() > np.iinfo(np.int64).max:
            return None
        labels = labels.astype(np.int64)
    steps = np.diff(labels)
    if not bool((steps > 0).all()):
        return None  # unique and in order, as a row filter leaves a default index
    starts = panel.starts
    if int(((panel.ends - starts) >= 2).sum()) < MIN_RUNS:
        return None  # too few subjects with several rows to tell a grouped file from chance
    ordered = panel.sort(labels)
    low = np.minimum.reduceat(ordered, starts)
    high = np.maximum.reduceat(ordered, starts)
    by_low = np.argsort(low, kind="stable")
    if bool((high[by_low][:-1] >= low[by_low][1:]).any()):
        return None  # runs interleave: cut from a panel not grouped by subject, nothing to see
    lengths = panel.ends - starts
    if not bool((high - low + 1 > lengths).any()):
        return None  # no hole even in steps of 1 (the common case: the common step is not computed)
    step = int(np.gcd.reduce(steps))  # labels 100, 103, 106, ...: holes count in steps of 3
    holes = (high - low) // step + 1 - lengths
    bad = np.flatnonzero(holes > 0)
    if len(bad) == 0:
        return None
    ids = panel.ids_at(starts[bad])
    missing = int(holes[bad].sum())
    return SubsetWarning(
        f"the frame looks cut from a panel grouped by subject, with rows removed inside subjects: {len(bad)} "
        f"subject(s) have holes in their run of index labels ({missing} labels missing between their rows); "
        f"first ids: {_fmt_ids(ids)}. Lags, changes and windows derived now skip the removed occasions. Derive on "
        f"the whole panel, then filter or split by subject; to silence: {SILENCE}",
        count=missing, ids=ids,
    )


def _outside_level() -> int:
    """``stacklevel`` of the first caller outside panelfx (the user's line, not ours)."""
    package = os.path.dirname(os.path.abspath(__file__)) + os.sep
    f = sys._getframe(1)  # after_panel
    level = 1
    while f is not None and os.path.abspath(f.f_code.co_filename).startswith(package):
        f = f.f_back  # type: ignore[assignment]
        level += 1
    return level
