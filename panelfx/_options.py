"""Unknown option names: a typed error that names the option and suggests the panelfx one.

Users arrive with pandas habits (``rolling(window=3, min_periods=2)``, ``fill_value=``,
``axis=``).  :func:`checked_options` wraps a public constructor so that an unknown
keyword raises :class:`~panelfx.errors.UnknownOptionError` (a ``TypeError``, as Python's
own "unexpected keyword argument" is) saying which option of this function was probably
meant: first from the table of habits below, then close spellings (difflib), else the
list of the function's options.

>>> import panelfx as pfx
>>> pfx.rolling("sbp", window=3)
Traceback (most recent call last):
...
panelfx.errors.UnknownOptionError: rolling() has no option window=; did you mean occasions= or span=? ...
"""

from __future__ import annotations

import difflib
import functools
import inspect
from collections.abc import Callable
from typing import Any, TypeVar

from .errors import UnknownOptionError

F = TypeVar("F", bound=Callable[..., Any])

#: Option names from pandas (and general) habits -> the panelfx options that may be meant,
#: in order; only those the function has are suggested.
HABITS: dict[str, tuple[str, ...]] = {
    "window": ("occasions", "span", "within"),
    "min_periods": ("min_valid",),
    "min_count": ("min_valid",),
    "periods": ("occasions", "offset"),
    "shift": ("periods", "offset"),
    "freq": ("span", "offset", "within"),
    "skipna": ("skip_missing",),
    "dropna": ("skip_missing",),
    "how": ("stat", "rule", "kind"),
    "func": ("stat",),
    "agg": ("stat",),
    "method": ("stat", "rule", "kind"),
    "column": ("col",),
    "columns": ("col",),
    "cols": ("col",),
    "on": ("col",),
    "inclusive": ("closed",),
    "closed": ("inclusive",),
    "suffix": ("name",),
    "prefix": ("name",),
    "tolerance": ("within",),
    "level": ("between", "levels"),  # renamed: within_between(level=) is between= now
}

#: Why an option has no counterpart, for habits that have none.
NOTES: dict[str, str] = {
    "window": "a window here is a number of occasions or a time span",
    "fill_value": "missing values stay missing; pfx.carry_forward fills them from earlier occasions",
    "fillna": "missing values stay missing; pfx.carry_forward fills them from earlier occasions",
    "axis": "transforms run down each subject's occasions; there is no axis",
    "center": "windows end at each occasion (past-only); there are no centred windows",
    "by": "subjects are given once, to derive(id=...)",
    "groupby": "subjects are given once, to derive(id=...)",
    "ascending": "occasions are ordered by the time column given to derive(time=...)",
}


def unknown_option_message(function: str, option: str, options: tuple[str, ...]) -> tuple[str, list[str]]:
    """The message for ``function(option=...)`` and the options suggested."""
    hints = [o for o in HABITS.get(option, ()) if o in options]
    hints += [o for o in difflib.get_close_matches(option, options, n=2, cutoff=0.7) if o not in hints]
    text = f"{function}() has no option {option}="
    if hints:
        text += f"; did you mean {' or '.join(f'{h}=' for h in hints)}?"
    if option in NOTES:
        text += f" ({NOTES[option]})"
    if not hints:
        text += f"; its options are: {', '.join(options) or 'none'}"
    return text, hints


def checked_options(func: F) -> F:
    """Wrap a constructor: an unknown keyword raises :class:`UnknownOptionError` with a hint."""
    params = inspect.signature(func).parameters
    if any(p.kind is p.VAR_KEYWORD for p in params.values()):
        return func  # takes any keyword: nothing to check
    options = tuple(n for n, p in params.items() if p.kind is not p.VAR_POSITIONAL)

    @functools.wraps(func)
    def checked(*args: Any, **kwargs: Any) -> Any:
        for key in kwargs:
            if key not in params:
                text, hints = unknown_option_message(func.__name__, key, options)
                raise UnknownOptionError(text, option=key, suggestions=hints)
        return func(*args, **kwargs)

    return checked  # type: ignore[return-value]
