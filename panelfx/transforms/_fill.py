"""Shared by the filling transforms (carry forward, baseline and worst carried forward): the flag column."""

from __future__ import annotations

import numpy as np
import pandas as pd


def fill_flag(filled: np.ndarray, term: str) -> pd.Categorical:
    """A categorical that holds ``term`` (the trade name of the rule: "LOCF", "BOCF", "WOCF")
    where a value was filled and is missing elsewhere (observed, or still missing)."""
    return pd.Categorical.from_codes(np.where(filled, 0, -1), categories=[term])


def flag_words(term: str, rule: str) -> str:
    return f"; flag column holds {term!r} where the value was filled ({rule}), missing elsewhere"
