"""Tools to unit-test derived variables: reference implementations, assertions and
hypothesis strategies (``panelfx.testing.strategies``, needs hypothesis)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .reference import reference

__all__ = ["reference", "assert_matches_reference"]


def assert_matches_reference(
    got: pd.DataFrame, expected: pd.DataFrame, columns: list[str] | None = None, *, rtol: float = 1e-9,
    atol: float = 1e-9,
) -> None:
    """Assert that derived columns equal the reference's, value by value (NaN equals NaN).

    Numbers are compared with tolerances, anything else exactly; the message names the
    column, the share of mismatches and the first mismatching row labels.
    """
    __tracebackhide__ = True
    columns = list(expected.columns.difference(got.columns.difference(expected.columns))) \
        if columns is None else columns
    for col in columns:
        g, e = got[col], expected[col]
        g_na, e_na = g.isna().to_numpy(), e.isna().to_numpy()
        bad = g_na != e_na
        both = ~g_na & ~e_na
        try:
            gv = g.to_numpy(dtype="float64", na_value=np.nan)
            ev = e.to_numpy(dtype="float64", na_value=np.nan)
            close = np.isclose(gv, ev, rtol=rtol, atol=atol) | (gv == ev)
        except (TypeError, ValueError):
            close = (g.astype(object).to_numpy() == e.astype(object).to_numpy())
        bad |= both & ~close
        if bad.any():
            rows = list(got.index[bad][:5])
            raise AssertionError(
                f"column {col!r}: {int(bad.sum())} of {len(bad)} values differ "
                f"({bad.mean():.1%}); first rows {rows}\n"
                f"got:\n{g[bad].head(5).to_string()}\nexpected:\n{e[bad].head(5).to_string()}"
            )
