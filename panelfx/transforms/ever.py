"""Ever/never: whether a flag has been true at any occasion so far."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from .._panel import Panel
from ._common import FlagHistory, flag_words


@dataclasses.dataclass(frozen=True, kw_only=True)
class Ever(FlagHistory):
    """Configured :func:`ever`."""

    type_name = "ever"

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_ever",)

    def describe(self) -> str:
        return (f"True once {self.col!r} has been true at an occasion {self._when()} the current one, else False "
                f"(a missing flag is not an event)" + flag_words(self.any_nonzero, self.where))

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [self.counts(panel) > 0]


def ever(col: str, *, include_current: bool = True, any_nonzero: bool = False, where: str | None = None,
         name: str | None = None) -> Ever:
    """Ever/never flag: True from the subject's first occasion with ``col`` true onwards.

    ``col`` is a true/false column (booleans, or numbers where 0 is false and any other
    number true).  ``include_current=False`` looks only at strictly earlier occasions
    ("ever before").  Missing values: a missing flag is not an event, so the result is
    never missing (False until a known event).  Past-only.  Output bool.  Default name:
    ``<col>_ever``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "wk": [1, 2, 3, 1, 2],
    ...                    "smoked": [False, True, False, False, False]})
    >>> pfx.derive(df, pfx.ever("smoked"), id="pid", time="wk")
       pid  wk  smoked  smoked_ever
    0    1   1   False        False
    1    1   2    True         True
    2    1   3   False         True
    3    2   1   False        False
    4    2   2   False        False
    """
    return Ever(col=col, include_current=include_current, any_nonzero=any_nonzero, where=where, name=name)
