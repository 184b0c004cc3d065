"""Typed errors raised by panelfx.

Every error derives from :class:`PanelError` and also from the builtin it really is
(a missing column is a ``KeyError``, a wrong dtype a ``TypeError``, a bad value a
``ValueError``), so ``except KeyError`` in old code keeps working.  The pieces of the
message are kept as attributes: ``column``, ``count`` and ``ids`` (the first few
offending subject ids or row labels).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

__all__ = [
    "PanelError",
    "MissingColumnError",
    "NullKeyError",
    "DuplicateOccasionError",
    "TimeTypeError",
    "ColumnTypeError",
    "PrecisionError",
    "ColumnExistsError",
    "ConflictingTiesError",
    "NotConstantError",
    "OptionError",
    "SplitSubjectError",
    "NestingError",
    "MissingTableError",
    "TiedRecordsError",
    "IntervalError",
    "FollowUpError",
    "UnknownSubjectError",
    "UnknownOptionError",
    "FrameTypeError",
    "MissingDependencyError",
    "NotPastOnlyError",
    "PanelWarning",
    "SubsetWarning",
]

#: How many offending ids an error message shows.
SHOW_IDS = 5


def _fmt_ids(ids: Sequence[Any]) -> str:
    shown = ", ".join(repr(i) for i in list(ids)[:SHOW_IDS])
    more = " ..." if len(ids) > SHOW_IDS else ""
    return f"[{shown}{more}]"


class PanelError(Exception):
    """Base class of every error panelfx raises about the data or the options."""

    def __init__(
        self,
        message: str,
        *,
        column: str | None = None,
        count: int | None = None,
        ids: Sequence[Any] = (),
    ) -> None:
        super().__init__(message)
        self.message = message
        self.column = column
        self.count = count
        self.ids = list(ids)[:SHOW_IDS]

    def __str__(self) -> str:  # KeyError would otherwise print the repr of the message
        return self.message

    def __reduce__(self) -> tuple[Any, ...]:
        # Errors raised in another process (a Dask worker) reach the caller pickled: keep the
        # class and every attribute (column, count, ids, ...), whatever the subclass's __init__.
        return _rebuild, (type(self), self.message, dict(self.__dict__))


def _rebuild(cls: type[PanelError], message: str, state: dict[str, Any]) -> PanelError:
    err = cls.__new__(cls)
    Exception.__init__(err, message)
    err.__dict__.update(state)
    return err


class MissingColumnError(PanelError, KeyError):
    """A column named in the panel declaration or in a transform is not in the frame."""


class NullKeyError(PanelError, ValueError):
    """An id or time value is missing."""


class DuplicateOccasionError(PanelError, ValueError):
    """Two rows share the same (id, time): occasions must be unique within subject."""


class TimeTypeError(PanelError, TypeError):
    """The time column (or a value compared with it) is neither numbers nor datetimes."""


class ColumnTypeError(PanelError, TypeError):
    """A column holds values of the wrong type, e.g. text where numbers are needed."""


class PrecisionError(ColumnTypeError):
    """Values a computation cannot hold exactly, e.g. integers beyond 2**53 read as float64."""


class ConflictingTiesError(PanelError, ValueError):
    """Rows sharing a subject and time disagree on a column that has no rule for combining them."""


class ColumnExistsError(PanelError, ValueError):
    """A derived column would overwrite a column that already exists."""


class NotConstantError(PanelError, ValueError):
    """A column that must be constant within subject varies."""


class OptionError(PanelError, ValueError):
    """A transform or function option has a value outside its rules."""


class SplitSubjectError(PanelError, ValueError):
    """A subject's rows are spread over more than one partition of a partitioned frame, where
    each partition must hold whole subjects.  ``ids`` are the first such subjects, ``count``
    how many there are, ``partitions`` the partition numbers of the first one."""

    def __init__(self, message: str, *, column: str | None = None, count: int | None = None,
                 ids: Sequence[Any] = (), partitions: Sequence[int] = ()) -> None:
        super().__init__(message, column=column, count=count, ids=ids)
        self.partitions = list(partitions)


class NestingError(PanelError, ValueError):
    """Nested levels that do not nest: a unit (a clinic, a subject) seen under two parents."""


class MissingTableError(PanelError, KeyError):
    """A transform reads a side table (``tables={"labs": ...}``) that was not given."""


class TiedRecordsError(PanelError, ValueError):
    """Records of a side table share subject and time but disagree, and no tie rule was chosen."""


class IntervalError(PanelError, ValueError):
    """Interval records (dosing, dispensing) that cannot be used: an end before its start, or
    records of one subject that overlap where overlaps are refused."""
class FollowUpError(PanelError, ValueError):
    """Follow-up or person-time is not defined: a missing entry, exit, event flag, start or stop, an
    exit at or before entry, a stop at or before start, or an event count that is not a whole number."""


class FrameTypeError(PanelError, TypeError):
    """Something that is not a frame where a frame is needed: the message names what was
    received and what is accepted (a pandas DataFrame, a polars DataFrame or a pyarrow Table)."""


class UnknownSubjectError(PanelError, ValueError):
    """A side table names subjects that are not in the frame."""


class UnknownOptionError(PanelError, TypeError):
    """A function was called with an option name it does not have (``rolling(window=3)``);
    the message suggests the option probably meant (``occasions=`` or ``span=``)."""

    def __init__(self, message: str, *, option: str, suggestions: Sequence[str] = ()) -> None:
        super().__init__(message)
        self.option = option
        self.suggestions = list(suggestions)


class MissingDependencyError(PanelError, ImportError):
    """An optional package needed for this (a file reader, say) is not installed; the message
    names the panelfx extra that installs it (``pip install 'panelfx[formats]'``)."""

    def __init__(self, message: str, *, extra: str) -> None:
        super().__init__(message)
        self.extra = extra


class NotPastOnlyError(OptionError):
    """Derived features that may see a subject's later occasions were asked for where only the past
    may be used (a prediction model).  ``column`` is the first such feature, ``columns`` all of them."""

    def __init__(self, message: str, *, columns: Sequence[str]) -> None:
        cols = list(columns)
        super().__init__(message, column=cols[0] if cols else None, count=len(cols))
        self.columns = cols


class PanelWarning(UserWarning):
    """Base class of the warnings panelfx gives; silence them all with
    ``warnings.simplefilter("ignore", panelfx.PanelWarning)``."""


class SubsetWarning(PanelWarning):
    """The frame given to ``derive`` looks like a subset of a panel with rows removed inside
    subjects: lags, changes and windows then skip the removed occasions.  ``count`` is the number
    of rows seen to be missing, ``ids`` the first few subjects they belong to (when known)."""

    def __init__(self, message: str, *, count: int = 0, ids: Sequence[Any] = ()) -> None:
        super().__init__(message)
        self.count = count
        self.ids = list(ids)[:SHOW_IDS]


def rows_message(what: str, column: str | None, count: int, ids: Sequence[Any], noun: str = "ids") -> str:
    """Build the standard message: what went wrong, in which column, how many rows, first ids."""
    where = f" in column {column!r}" if column is not None else ""
    return f"{what}{where}: {count} row{'s' if count != 1 else ''}; first {noun}: {_fmt_ids(ids)}"
