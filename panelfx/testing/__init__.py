"""A correctness kit for derived variables: assertions, a slow reference and panel generators.

Use it to unit-test the derived variables of your own pipeline (see the README section
"Testing your derived variables"):

- assertions that raise ``AssertionError`` naming the column, subject ids and row labels
  that fail: :func:`assert_constant_within`, :func:`assert_non_decreasing_within`,
  :func:`assert_non_increasing_within`, :func:`assert_past_only`,
  :func:`assert_derived_from`, :func:`assert_panel_structure` and
  :func:`assert_matches_reference`;
- :func:`reference`, a deliberately simple (slow) re-implementation of every transform,
  for cross-checks on small frames only;
- :func:`panels`, a hypothesis strategy generating long-format panels
  (``panelfx.testing.strategies``; needs the optional dependency hypothesis, which is
  imported only when you use it).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import pandas as pd

from .assertions import (
    _fail,
    _same,
    assert_constant_within,
    assert_derived_from,
    assert_non_decreasing_within,
    assert_non_increasing_within,
    assert_panel_structure,
    assert_past_only,
)
from .reference import reference

__all__ = [
    "reference",
    "assert_matches_reference",
    "assert_constant_within",
    "assert_non_decreasing_within",
    "assert_non_increasing_within",
    "assert_past_only",
    "assert_derived_from",
    "assert_panel_structure",
    "panels",
    "PanelCase",
]


def assert_matches_reference(
    got: pd.DataFrame,
    expected: pd.DataFrame,
    columns: Sequence[str] | None = None,
    *,
    rtol: float = 1e-9,
    atol: float = 1e-9,
    id: str | Sequence[str] | None = None,
    time: str | None = None,
) -> None:
    """Assert that derived columns equal the reference's, value by value (missing equals missing).

    ``got`` and ``expected`` must have the same rows in the same order (as
    :func:`panelfx.derive` and :func:`reference` return them).  ``columns`` defaults to
    the columns of ``expected`` that ``got`` also has.  Numbers are compared with the
    tolerances, anything else exactly.  The message names the column, the number of
    mismatches and the first mismatching row labels (and subject ids and times when
    ``id`` and ``time`` are given), with the values got and expected.

    >>> import pandas as pd, panelfx as pfx
    >>> from panelfx.testing import assert_matches_reference, reference
    >>> df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 7, 0], "y": [1.0, 3.0, 5.0]})
    >>> got = pfx.derive(df, pfx.lag("y"), id="pid", time="day")
    >>> assert_matches_reference(got, reference(df, pfx.lag("y"), id="pid", time="day"))
    >>> assert_matches_reference(got.assign(y_lag1=0.0), reference(df, pfx.lag("y"), id="pid", time="day"),
    ...                          id="pid", time="day")
    Traceback (most recent call last):
    ...
    AssertionError: column 'y_lag1' differs from the reference: 3 of 3 values (100.0%): 2 subject(s), 3 row(s)
    first subject ids: [1, 2]
    first row labels: [0, 1, 2]
     row  pid  day  got  expected
       0    1    0  0.0       NaN
       1    1    7  0.0       1.0
       2    2    0  0.0       NaN
    """
    __tracebackhide__ = True
    if len(got) != len(expected):
        raise AssertionError(f"got {len(got)} rows, the reference {len(expected)}")
    if columns is None:
        columns = [c for c in expected.columns if c in got.columns]
    id_cols = [] if id is None else ([id] if isinstance(id, str) else list(id))
    for col in columns:
        for f, what in ((got, "got"), (expected, "expected")):
            if col not in f.columns:
                raise AssertionError(f"column {col!r} is missing from the {what} frame")
        g, e = got[col], expected[col]
        ok = _same(g.reset_index(drop=True), e.reset_index(drop=True), rtol, atol)
        if not ok.all():
            n_bad = int((~ok).sum())
            _fail(
                f"column {col!r} differs from the reference: {n_bad} of {len(ok)} values ({n_bad / len(ok):.1%})",
                got, ~ok, id_cols, time, {"got": g.to_numpy(dtype=object), "expected": e.to_numpy(dtype=object)},
            )


def __getattr__(name: str) -> Any:
    # The strategies need hypothesis, an optional dependency: import them only on use.
    if name in ("panels", "PanelCase", "strategies"):
        import importlib

        strategies = importlib.import_module(f"{__name__}.strategies")
        return strategies if name == "strategies" else getattr(strategies, name)
    raise AttributeError(f"module 'panelfx.testing' has no attribute {name!r}")

