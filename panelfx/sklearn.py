"""scikit-learn adapter: a :class:`~panelfx.Derivation` as a transformer in a ``Pipeline``.

``pip install 'panelfx[sklearn]'``; ``import panelfx`` never imports scikit-learn, this
module does.

>>> import pandas as pd, panelfx as pfx
>>> from panelfx.sklearn import DerivedFeatures
>>> visits = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 60, 0, 30],
...                        "sbp": [150.0, 144.0, 141.0, 138.0, 139.0]})  # invented
>>> features = DerivedFeatures(pfx.Derivation(pfx.lag("sbp"), pfx.change_from_previous("sbp"),
...                                           id="pid", time="day"))
>>> features.fit_transform(visits)
   sbp_lag1  sbp_diff
0       NaN       NaN
1     150.0      -6.0
2     144.0      -3.0
3       NaN       NaN
4     138.0       1.0
>>> features.get_feature_names_out().tolist()
['sbp_lag1', 'sbp_diff']
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

try:
    from sklearn.base import BaseEstimator, TransformerMixin
    from sklearn.utils.validation import check_is_fitted
except ImportError as err:  # pragma: no cover - the test extra installs scikit-learn
    raise ImportError("panelfx.sklearn needs scikit-learn: pip install 'panelfx[sklearn]'") from err

from .derivation import Derivation
from .errors import ColumnTypeError, MissingColumnError, NotPastOnlyError, OptionError

__all__ = ["DerivedFeatures"]


class DerivedFeatures(TransformerMixin, BaseEstimator):
    """The derived columns of ``derivation`` as model features (a scikit-learn transformer).

    ``transform(X)`` applies the derivation to the panel ``X`` (a pandas DataFrame with the
    id, time and input columns the derivation declares) and returns the derived columns only,
    or the ``features`` named (derived columns, or columns of ``X`` passed through as they
    are), as a DataFrame with ``X``'s index and row order and the derived dtypes.
    ``set_output(transform="pandas")`` (or on the whole ``Pipeline``) is supported and gives
    the same frame; other scikit-learn steps accept it as input.  ``fit`` learns nothing: the
    features of a row depend only on its own subject's rows.

    ``past_only=True`` (the default, for prediction) refuses, at ``fit``, any selected derived
    column that may see a subject's later occasions (a baseline that is not the first occasion,
    a within/between split over all visits, anything derived from them: the data dictionary's
    ``past_only``) with :class:`~panelfx.NotPastOnlyError`.  Past-only columns may still use
    the *current* row (a change from the previous visit includes today's value): to predict a
    row's outcome from its past, use lags of that outcome.  ``past_only=False`` allows
    everything (explanatory models, where the whole follow-up is known).

    Every subject's rows must reach ``transform`` together: split with ``GroupKFold`` (groups
    from :func:`~panelfx.subject_key`), never by rows, or the lags of a fold skip the rows of
    another (``derive`` warns with :class:`~panelfx.SubsetWarning` when it can tell).
    Side tables are not supported here: derive those columns beforehand.
    """

    def __init__(self, derivation: Derivation, *, features: Sequence[str] | None = None,
                 past_only: bool = True) -> None:
        # scikit-learn's rule: store the parameters as given, check them in fit
        self.derivation = derivation
        self.features = features
        self.past_only = past_only

    # ------------------------------------------------------------------ scikit-learn API
    def fit(self, X: pd.DataFrame, y: Any = None) -> DerivedFeatures:
        """Check the options against the derivation and ``X``'s columns; nothing is learnt."""
        _frame(X)
        d = self._derivation()
        names = self._names(d)
        outputs = set(d.outputs())
        missing = [c for c in names if c not in outputs and c not in X.columns]
        if missing:
            raise MissingColumnError(
                f"features {missing} are neither outputs of the derivation {list(d.outputs())} nor columns of X",
                column=missing[0], count=len(missing))
        if not isinstance(self.past_only, (bool, np.bool_)):
            raise OptionError(f"past_only must be True or False, got {self.past_only!r}", column=None)
        if self.past_only:
            table = d.dictionary()
            past = dict(zip(table["column"], table["past_only"]))
            future = [c for c in names if c in outputs and not past[c]]
            if future:
                raise NotPastOnlyError(
                    f"features {future} may use a subject's later occasions (past_only is False in the derivation's "
                    f"dictionary), which a prediction model must not see; select past-only features with "
                    f"features=, or pass past_only=False for an explanatory model", columns=future)
        self.n_features_in_ = X.shape[1]
        self.feature_names_in_ = np.asarray(X.columns, dtype=object)
        self.feature_names_out_ = np.asarray(names, dtype=object)
        return self

    def transform(self, X: pd.DataFrame) -> pd.DataFrame:
        """The selected features of ``X``'s rows, derived on ``X`` (with ``X``'s index and row order)."""
        check_is_fitted(self)
        _frame(X)
        d = self._derivation()
        names = list(self.feature_names_out_)
        outputs = set(d.outputs())
        derived = d.apply(X, keep="new" if all(c in outputs for c in names) else "all")
        return derived[names]

    def get_feature_names_out(self, input_features: Any = None) -> np.ndarray:
        """Names of the columns ``transform`` returns (the derived ones, or ``features``)."""
        check_is_fitted(self)
        return np.asarray(self.feature_names_out_, dtype=object)

    # ------------------------------------------------------------------ checks
    def _derivation(self) -> Derivation:
        if not isinstance(self.derivation, Derivation):
            raise OptionError(f"derivation must be a panelfx.Derivation, got {type(self.derivation).__name__}",
                              column=None)
        return self.derivation

    def _names(self, d: Derivation) -> list[str]:
        if self.features is None:
            return list(d.outputs())
        if isinstance(self.features, str) or not all(isinstance(c, str) for c in self.features):
            raise OptionError(f"features must be a list of column names, got {self.features!r}", column=None)
        names = list(self.features)
        if not names or len(set(names)) != len(names):
            raise OptionError(f"features must name one or more distinct columns, got {names!r}", column=None)
        return names


def _frame(X: Any) -> None:
    if not isinstance(X, pd.DataFrame):
        raise ColumnTypeError(
            f"DerivedFeatures needs the panel as a pandas DataFrame (id, time and input columns), got "
            f"{type(X).__name__}: put it first in the Pipeline, before steps that turn frames into arrays")
