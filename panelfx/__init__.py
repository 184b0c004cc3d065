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
from ._transform import Transform
from .check import check
from .derivation import Derivation, DerivationFileError
from .derive import derive
from .errors import (
    ColumnExistsError,
    ColumnTypeError,
    DuplicateOccasionError,
    MissingColumnError,
    NotConstantError,
    NullKeyError,
    OptionError,
    PanelError,
    PrecisionError,
    SplitSubjectError,
    TimeTypeError,
)
from .summary import subject_summary
from .transforms.baseline import baseline
from .transforms.carry_forward import carry_forward
from .transforms.change_from_baseline import change_from_baseline
from .transforms.change_from_previous import change_from_previous
from .transforms.cumulative import cumulative
from .transforms.events_so_far import events_so_far
from .transforms.ever import ever
from .transforms.gap import gap
from .transforms.lag import lag
from .transforms.occasion import occasion
from .transforms.rolling import rolling
from .transforms.time_since import time_since
from .transforms.time_since_baseline import time_since_baseline
from .transforms.within_between import within_between

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
    "subject_summary",
    # errors
    "PanelError",
    "MissingColumnError",
    "NullKeyError",
    "DuplicateOccasionError",
    "TimeTypeError",
    "ColumnTypeError",
    "PrecisionError",
    "ColumnExistsError",
    "NotConstantError",
    "OptionError",
    "DerivationFileError",
    "SplitSubjectError",
]
