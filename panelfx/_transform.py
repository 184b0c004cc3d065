"""The transform protocol shared by every derived variable.

A transform is a frozen, keyword-only dataclass built by a small constructor function
(``baseline("sbp")``).  Its fields are its options, so ``repr`` shows them, two equal
configurations compare equal, and a saved derivation can rebuild it from plain values.
Subclasses register themselves under ``type_name`` for that purpose; the constructor
function of that name gives the ``repr`` (``pfx.rolling('sbp', 'max', span='90d')``).
"""

from __future__ import annotations

import dataclasses
import inspect
import sys
from collections.abc import Callable, Sequence
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
        if "__repr__" not in cls.__dict__:  # set before @dataclass runs, which then keeps it
            cls.__repr__ = Transform.__repr__  # type: ignore[method-assign]

    def __repr__(self) -> str:
        """The call that builds this transform: ``pfx.lag('sbp', 2)``, options at their defaults
        left out (``ClassName(field=...)`` for a transform without a public constructor)."""
        call = _constructor_call(self)
        if call is not None:
            return call
        fields = ", ".join(f"{f.name}={getattr(self, f.name)!r}" for f in dataclasses.fields(self) if f.repr)
        return f"{type(self).__qualname__}({fields})"

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

    def _call_values(self) -> dict[str, Any]:
        """Constructor arguments that are not simply the field of that name (for the repr)."""
        return {}

    # -- shared helpers ------------------------------------------------------------
    def options(self) -> dict[str, Any]:
        """The fields as plain values (what a saved derivation stores)."""
        return {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}


def constructor(cls: type[Transform]) -> Callable[..., Transform] | None:
    """The public constructor function of a transform class: the function named ``type_name``
    in the module that defines the class, if its parameters are all fields of the class."""
    func = getattr(sys.modules.get(cls.__module__), cls.type_name, None) if cls.type_name else None
    if not callable(func):
        return None
    fields = {f.name for f in dataclasses.fields(cls)}
    params = inspect.signature(func).parameters.values()
    if any(p.kind in (p.VAR_POSITIONAL, p.VAR_KEYWORD) or p.name not in fields for p in params):
        return None
    return func


def _constructor_call(tr: Transform) -> str | None:
    func = constructor(type(tr))
    if func is None:
        return None
    params = list(inspect.signature(func).parameters.values())
    values = {p.name: getattr(tr, p.name) for p in params} | tr._call_values()
    required = {p.name: values[p.name] for p in params if p.default is p.empty}
    try:  # the options the constructor fills in by itself (periods=None becomes 1, say)
        plain = func(**required)
    except Exception:  # noqa: BLE001 - some options are needed together; keep the signature defaults only
        plain = None

    def call(keep: Callable[[inspect.Parameter], bool]) -> tuple[str, dict[str, Any]]:
        kept = [p for p in params if p.default is p.empty or keep(p)]
        # Positional as in the signature up to the first one left out, keywords after it.
        positional: list[str] = []
        for p in params:
            if p.kind is not p.POSITIONAL_OR_KEYWORD or p not in kept:
                break
            positional.append(p.name)
        words = [repr(values[n]) for n in positional]
        words += [f"{p.name}={values[p.name]!r}" for p in kept if p.name not in positional]
        return f"pfx.{func.__name__}({', '.join(words)})", {p.name: values[p.name] for p in kept}

    def differs(p: inspect.Parameter) -> bool:
        return not _same(values[p.name], p.default)

    short, kwargs = call(lambda p: differs(p) and (plain is None or not _same(values[p.name],
                                                                              getattr(plain, p.name))))
    longer, all_kwargs = call(differs)
    # The repr must rebuild the same transform: leaving out a normalised option may not (then
    # say more), and a field the constructor does not take may differ (then no call at all).
    for text, kw in ((short, kwargs), (longer, all_kwargs)):
        try:
            if func(**kw) == tr:
                return text
        except Exception:  # noqa: BLE001
            pass
    return None


def _same(a: Any, b: Any) -> bool:
    return type(a) is type(b) and a == b  # 1 and 1.0 and True are different options


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
