"""The transform protocol shared by every derived variable.

A transform is a frozen, keyword-only dataclass built by a small constructor function
(``baseline("sbp")``).  Its fields are its options, so ``repr`` shows them, two equal
configurations compare equal, and a saved derivation can rebuild it from plain values.
Subclasses register themselves under ``type_name`` for that purpose.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any, ClassVar

from .errors import OptionError

if TYPE_CHECKING:
    from ._panel import Panel
    from ._tables import TableUse

#: type_name -> transform class; filled by ``Transform.__init_subclass__``.
REGISTRY: dict[str, type[Transform]] = {}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Transform:
    """Base class.  Subclasses set ``type_name`` and implement the four methods below."""

    type_name: ClassVar[str] = ""

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if cls.type_name:
            REGISTRY[cls.type_name] = cls

    # -- what it needs and makes -------------------------------------------------
    def inputs(self) -> tuple[str, ...]:
        """Columns the transform reads (besides id and time)."""
        raise NotImplementedError

    def outputs(self) -> tuple[str, ...]:
        """Names of the columns it adds, in order."""
        raise NotImplementedError

    def groupings(self) -> tuple[str, ...]:
        """Those of :meth:`inputs` read as groupings (levels such as a clinic), which may
        be id columns; none by default."""
        return ()

    @property
    def past_only(self) -> bool:
        """True when each row's value uses only that occasion and earlier ones."""
        raise NotImplementedError

    def describe(self) -> str:
        """The options in words, for the data dictionary."""
        raise NotImplementedError

    def compute(self, panel: Panel) -> Sequence[Any]:
        """One array per output, in the caller's row order."""
        raise NotImplementedError

    def unit_kinds(self, time: str) -> tuple[str | None, ...]:
        """Per output, what its time unit means for the data dictionary: "duration", "rate" (per
        unit of time), "area" (value x time) or None (no time unit: a value, a count, a time).
        ``time`` is the panel's time column (a difference of it is a duration)."""
        return (None,) * len(self.outputs())

    def tables(self) -> tuple[TableUse, ...]:
        """Side tables the transform reads (``derive(..., tables=)``), with the columns it reads."""
        return ()

    # -- shared helpers ------------------------------------------------------------
    def options(self) -> dict[str, Any]:
        """The fields as plain values (what a saved derivation stores)."""
        return {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}


def check_choice(name: str, value: Any, choices: Sequence[Any]) -> None:
    if value not in choices:
        raise OptionError(f"{name} must be one of {list(choices)}, got {value!r}")


def check_column_name(name: str, value: Any) -> None:
    if not isinstance(value, str) or not value:
        raise OptionError(f"{name} must be a column name (a non-empty string), got {value!r}")


def check_int(name: str, value: Any, *, nonzero: bool = False, minimum: int | None = None) -> None:
    if isinstance(value, bool) or not isinstance(value, int):
        raise OptionError(f"{name} must be an integer, got {value!r}")
    if nonzero and value == 0:
        raise OptionError(f"{name} must be a non-zero integer, got 0")
    if minimum is not None and value < minimum:
        raise OptionError(f"{name} must be an integer >= {minimum}, got {value!r}")


def check_bool(name: str, value: Any) -> None:
    if not isinstance(value, bool):
        raise OptionError(f"{name} must be True or False, got {value!r}")


def check_name(value: Any) -> None:
    if value is not None:
        check_column_name("name", value)


@dataclasses.dataclass(frozen=True, kw_only=True)
class OccasionHelper(Transform):
    """Base of the transforms that read only the time column (occasion, gap, ...)."""

    name: str | None = None

    def __post_init__(self) -> None:
        check_name(self.name)

    def inputs(self) -> tuple[str, ...]:
        return ()

    @property
    def past_only(self) -> bool:
        return True

    def unit_kinds(self, time: str) -> tuple[str | None, ...]:
        return ("duration",)  # gap and time since baseline; occasion overrides
