"""panelfx: longitudinal derived variables for long-format repeated-measures data.

Declare the panel once (``id``, ``time``), pass transforms, get a tidy frame back:

>>> import pandas as pd, panelfx as pfx
>>> df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 14, 0], "sbp": [150.0, 142.0, 138.0]})
>>> pfx.derive(df, pfx.baseline("sbp"), pfx.change_from_baseline("sbp"), id="pid", time="day")
   pid  day    sbp  sbp_baseline  sbp_change
0    1    0  150.0         150.0         0.0
1    1   14  142.0         150.0        -8.0
2    2    0  138.0         138.0         0.0
"""

from __future__ import annotations

from . import accessor as _accessor  # noqa: F401  (imported for its effect: registers DataFrame.pfx)
from ._frames import to_pandas
from ._transform import Transform
from .check import check
from .collapse import collapse_ties
from .derivation import Derivation, DerivationFileError
from .derive import derive
from .episodes import episodes
from .errors import (
    ColumnExistsError,
    ColumnTypeError,
    ConflictingTiesError,
    DuplicateOccasionError,
    FollowUpError,
    FrameTypeError,
    IntervalError,
    MissingColumnError,
    MissingDependencyError,
    MissingTableError,
    NestingError,
    NotConstantError,
    NotPastOnlyError,
    NullKeyError,
    OptionError,
    PanelError,
    PanelWarning,
    PrecisionError,
    SplitSubjectError,
    SubsetWarning,
    TiedRecordsError,
    TimeTypeError,
    UnknownOptionError,
    UnknownSubjectError,
)
from .grid import grid
from .person_time import person_time
from .snapshot import snapshot
from .subject_key import subject_key
from .summary import subject_summary
from .transforms.analysis_visit import analysis_visit
from .transforms.as_of import as_of
from .transforms.baseline import baseline
from .transforms.carry_baseline import carry_baseline
from .transforms.carry_forward import carry_forward
from .transforms.carry_worst import carry_worst
from .transforms.change_from_baseline import change_from_baseline
from .transforms.change_from_previous import change_from_previous
from .transforms.cumulative import cumulative
from .transforms.dose_dates import first_dose, last_dose
from .transforms.events_so_far import events_so_far
from .transforms.ever import ever
from .transforms.exposure import exposure
from .transforms.gap import gap
from .transforms.lag import lag
from .transforms.occasion import occasion
from .transforms.rolling import rolling
from .transforms.study_day import study_day
from .transforms.table_window import table_window
from .transforms.time_since import time_since
from .transforms.time_since_baseline import time_since_baseline
from .transforms.visit_pick import visit_pick
from .transforms.within_between import within_between
from .treatment_emergent import treatment_emergent
from .variance import design_effect, variance_components
from .visit_grid import visit_grid
from .visit_windows import Windows, windows

__version__ = "0.1.0"

__all__ = [
    "derive",
    "check",
    "Transform",
    "Derivation",
    # transforms
    "baseline",
    "change_from_baseline",
    "change_from_previous",
    "lag",
    "cumulative",
    "time_since",
    "events_so_far",
    "ever",
    "carry_forward",
    "within_between",
    "time_since_baseline",
    "occasion",
    "gap",
    "rolling",
    "as_of",
    "table_window",
    "exposure",
    "first_dose",
    "last_dose",
    "subject_summary",
    "collapse_ties",
    "variance_components",
    "design_effect",
    "grid",
    # planned visits
    "study_day",
    "windows",
    "Windows",
    "analysis_visit",
    "visit_pick",
    "visit_grid",
    "carry_baseline",
    "carry_worst",
    "treatment_emergent",
    # interval data
    "episodes",
    "person_time",
    "snapshot",
    # models
    "subject_key",
    # errors
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
    "NestingError",
    "DerivationFileError",
    "SplitSubjectError",
    "MissingTableError",
    "TiedRecordsError",
    "IntervalError",
    "FollowUpError",
    "UnknownSubjectError",
    "UnknownOptionError",
    "FrameTypeError",
    # frames from other libraries
    "to_pandas",
    "MissingDependencyError",
    "NotPastOnlyError",
    # warnings
    "PanelWarning",
    "SubsetWarning",
]


# A clean namespace (tab completion, dir()): the public API only.  The submodules imported
# above for their contents are dropped as attributes; ``import panelfx.errors`` and
# ``panelfx.errors.X`` keep working through ``__getattr__`` (hidden from type checkers, so
# that a misspelt ``pfx.lagg`` is still flagged).
def __dir__() -> list[str]:
    return sorted({*__all__, *(n for n in globals() if n.startswith("__") and n.endswith("__"))})


def _drop_submodules() -> None:
    import types

    for name, value in list(globals().items()):
        if isinstance(value, types.ModuleType) and not name.startswith("_") and name not in __all__:
            del globals()[name]
    globals().pop("annotations", None)  # the __future__ feature stays on; only the name goes


_drop_submodules()

from typing import TYPE_CHECKING  # noqa: E402  (here: used only by the block below)

if not TYPE_CHECKING:

    def __getattr__(name: str) -> object:
        import sys

        module = sys.modules.get(f"{__name__}.{name}")  # a submodule already imported
        if module is None:
            raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
        return module

del TYPE_CHECKING
