"""Hypothesis strategies for long-format panels (hypothesis is an optional dependency).

>>> from hypothesis import given
>>> from panelfx.testing.strategies import panels
>>> @given(case=panels(subjects=(1, 4), time_kinds=("datetime",)))
... def test_my_variable(case):
...     out = my_pipeline(case.frame, **case.keys)          # doctest: +SKIP
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Sequence
from typing import Any, NamedTuple

import numpy as np
import pandas as pd

try:
    from hypothesis import strategies as st
except ImportError as err:  # pragma: no cover - exercised only without hypothesis
    raise ImportError(
        "panelfx.testing.strategies needs hypothesis, an optional dependency: "
        "pip install hypothesis (or pip install 'panelfx[test]')"
    ) from err

__all__ = ["panels", "PanelCase", "ID_KINDS", "TIME_KINDS", "ALL_ID_KINDS", "ALL_TIME_KINDS",
           "EDGE_TIME_KINDS", "INDEX_KINDS", "VALUE_KINDS", "VALUE_RANGES"]


class PanelCase(NamedTuple):
    """A generated panel and its declaration, ready for ``derive(case.frame, ..., **case.keys)``."""

    frame: pd.DataFrame
    id: str | list[str]
    time: str

    @property
    def keys(self) -> dict[str, Any]:
        return {"id": self.id, "time": self.time}


#: Default kinds of subject id: integers, strings, a categorical, two columns (site, number).
ID_KINDS = ("int", "str", "category", "multi")
#: Every id kind: the defaults plus Arrow-backed strings and nullable integers.
ALL_ID_KINDS = (*ID_KINDS, "arrow_str", "nullable_int")
#: Default kinds of time: integers, floats, naive datetimes, tz-aware datetimes (Europe/Berlin).
TIME_KINDS = ("int", "float", "datetime", "datetime_tz")
#: Time kinds at the edges of their types: datetimes in unit s, ms or us and dates (objects or
#: Arrow date32) anywhere in the years 1000-9999, int64 times beyond 2**53, short decimal floats.
EDGE_TIME_KINDS = ("datetime_s", "datetime_ms", "datetime_us", "date_objects", "arrow_date", "huge_int",
                   "decimal")
#: Every time kind: the defaults plus timedeltas, nullable integers, Arrow timestamps and the edge kinds.
ALL_TIME_KINDS = (*TIME_KINDS, "timedelta", "nullable_int", "arrow_timestamp", *EDGE_TIME_KINDS)
#: Row labels: the default 0..n-1, strings, non-contiguous descending integers, a two-level MultiIndex.
INDEX_KINDS = ("range", "str", "int", "multi")
#: Storage of the value columns: numpy, pandas nullable (Float64, Int64, boolean), Arrow-backed.
VALUE_KINDS = ("numpy", "nullable", "arrow")
#: Ranges of the value columns: ordinary magnitudes, or mixed with the limits of float64 and int64.
VALUE_RANGES = ("normal", "extreme")

_EXTREMES = [1e12, -1e12, 1e-12, -1e-12, 123456789.123, -0.0]

_F64 = np.finfo(np.float64)
_I64 = np.iinfo(np.int64)
#: value_range="extreme": float64 limits for y (finite only; 5e-324 and 2.5e-320 are subnormal) ...
_FLOAT_EDGES = (1e308, -1e308, float(_F64.max), -float(_F64.max), 1e300, -1e300, 1e-308, -1e-308,
                float(_F64.smallest_normal), 5e-324, -5e-324, 2.5e-320, -0.0)
#: ... int64 values not representable in float64 (beyond 2**53) and the int64 limits for x ...
_INT_EDGES = (2**53, 2**53 + 1, -(2**53) - 1, 2**60 + 1, -(2**62) - 3, int(_I64.max), int(_I64.min))
#: ... non-negative float64 limits for dose ...
_DOSE_EDGES = (1e308, float(_F64.max), 1e-308, 5e-324)
#: ... and one scale per subject for its ordinary y values (whole subjects near 1e12, 1e300, 1e-300).
_SCALES = (1.0, 1e12, 1e300, 1e-300)

#: Panels with more rows or subjects than this draw their per-row and per-subject values from a
#: numpy generator seeded by hypothesis: fast for long subjects, at the cost of finer shrinking.
_BULK = 100

#: Ticks per second of the datetime edge kinds, and the bounds they are drawn in (years 1000-9999).
_TICKS = {"datetime_s": 1, "datetime_ms": 10**3, "datetime_us": 10**6}
_FIRST_SECOND = -30_610_224_000  # 1000-01-01T00:00:00 in seconds since 1970-01-01
_LAST_SECOND = 253_402_300_799  # 9999-12-31T23:59:59
_NS_FIRST_SECOND = -9_223_372_036  # the first whole second a datetime64[ns] holds (1677-09-21)
_NS_LAST_SECOND = 9_223_372_036  # the last (2262-04-11)
_EPOCH_DAY = _dt.date(1970, 1, 1).toordinal()
_FIRST_DAY = _dt.date(1000, 1, 1).toordinal()
_LAST_DAY = _dt.date(9999, 12, 31).toordinal()

#: Strings of the id parts: empty, blank, case and accent variants (composed and decomposed),
#: texts that readers take for missing, non-Latin scripts.
_ID_TEXTS = ("", " ", "a", "A", "a ", "\u00e9", "e\u0301", "0", "00", "nan", "None", "NA", "\u00df",
             "\u65e5\u672c")
_UNUSED = 2**16 + 1  # unused categories of a categorical id part, when it has them
_unused_categories: pd.Index | None = None


def _check(name: str, given: Sequence[str], allowed: Sequence[str]) -> list[str]:
    given = list(given)
    bad = [k for k in given if k not in allowed]
    if not given or bad:
        raise ValueError(f"{name} must be a non-empty selection of {list(allowed)}, got {given!r}")
    return given


def _range(name: str, value: Any, low: int) -> tuple[int, int]:
    ok = (isinstance(value, tuple) and len(value) == 2 and all(isinstance(v, int) for v in value)
          and low <= value[0] <= value[1])
    if not ok:
        raise ValueError(f"{name} must be a (min, max) pair of integers with {low} <= min <= max, got {value!r}")
    return value


def _lists(draw: st.DrawFn, rng: np.random.Generator | None, n: int, strategy: st.SearchStrategy,
           sample: Callable[[np.random.Generator, int], np.ndarray]) -> Any:
    """n values: drawn one by one by hypothesis, or in bulk from the seeded generator ``rng``."""
    if rng is None:
        return draw(st.lists(strategy, min_size=n, max_size=n))
    return sample(rng, n)


def _mix(*parts: Callable[[np.random.Generator, int], np.ndarray],
         dtype: Any = "float64") -> Callable[[np.random.Generator, int], np.ndarray]:
    """The generator-side twin of ``st.one_of``: each value from one of ``parts``, chosen evenly."""

    def sample(rng: np.random.Generator, n: int) -> np.ndarray:
        out = np.empty(n, dtype=dtype)
        pick = rng.integers(0, len(parts), n)
        for i, part in enumerate(parts):
            where = pick == i
            out[where] = part(rng, int(where.sum()))
        return out

    return sample


def _pool(values: Sequence[Any], dtype: Any = "float64") -> Callable[[np.random.Generator, int], np.ndarray]:
    arr = np.array(values, dtype=dtype)
    return lambda rng, n: rng.choice(arr, n)


def _anchors(draw: st.DrawFn, rng: np.random.Generator | None, spans: np.ndarray, low: int, high: int,
             marks: Sequence[int]) -> np.ndarray:
    """Each subject's first time in [low, high - span]: at a bound, straddling one of ``marks``
    (half its span before the mark), or anywhere in between."""
    anchors = []
    for span in spans.tolist():
        top = high - span
        special = [low, top, *(m - span // 2 for m in marks)]
        special = [a for a in special if low <= a <= top]
        if rng is None:
            anchors.append(draw(st.one_of(st.sampled_from(special), st.integers(low, top))))
        elif rng.random() < 0.5:
            anchors.append(special[int(rng.integers(0, len(special)))])
        else:
            anchors.append(int(rng.integers(low, top, endpoint=True)))
    return np.array(anchors, dtype=np.int64)


def _id_part(draw: st.DrawFn, kind: str, digits: np.ndarray) -> Any:
    """One id column with a distinct value per digit, of the given single-column kind."""
    if kind in ("int", "nullable_int"):
        base = draw(st.sampled_from([0, 1000, int(_I64.min), 2**62]))
        step = draw(st.sampled_from([1, 7, 2**40]))
        values = np.int64(base) + digits * np.int64(step)
        return values if kind == "int" else pd.array(values, dtype="Int64")
    shift = draw(st.integers(0, len(_ID_TEXTS) - 1))
    names = [_ID_TEXTS[(d + shift) % len(_ID_TEXTS)] if d < len(_ID_TEXTS) else f"v{d}"
             for d in range(int(digits.max()) + 1 if len(digits) else 0)]
    if kind == "str":
        return np.array(names, dtype=object)[digits]
    if kind == "arrow_str":
        return pd.array(np.array(names, dtype=object)[digits], dtype="string[pyarrow]")
    categories = pd.Index(names[::-1], dtype=object)  # category order differs from text order
    if draw(st.booleans()):
        global _unused_categories
        if _unused_categories is None:
            _unused_categories = pd.Index([f"~unused{i}" for i in range(_UNUSED)], dtype=object)
        categories = categories.append(_unused_categories)
    return pd.Categorical.from_codes(len(names) - 1 - digits, dtype=pd.CategoricalDtype(categories))


@st.composite
def panels(
    draw: st.DrawFn,
    *,
    subjects: tuple[int, int] = (1, 6),
    occasions: tuple[int, int] = (1, 6),
    id_kinds: Sequence[str] = ID_KINDS,
    time_kinds: Sequence[str] = TIME_KINDS,
    missing: bool = True,
    shuffle: bool = True,
    all_missing: bool = True,
    extremes: bool = False,
    index_kinds: Sequence[str] | None = None,
    value_kinds: Sequence[str] = ("numpy",),
    id_parts: tuple[int, int] | None = None,
    value_range: str = "normal",
) -> PanelCase:
    """Long-format panels: one row per subject and occasion, unique occasions per subject,
    irregular times (each subject starts at its own time), values with ties.

    Columns: the id (``pid``; or ``site`` and ``pid`` for ``"multi"``; or ``id1`` ...
    ``idk`` with ``id_parts``), the time ``t``, then ``y`` (float, the main outcome:
    missing values, ties, optionally extremes), ``x`` (small integers, -5..5), ``flag``
    (bool) and ``dose`` (non-negative float, never missing).

    Options:

    - ``subjects``, ``occasions``: (min, max) numbers of subjects and of occasions per
      subject; a minimum of 1 occasion gives single-occasion subjects.  Long subjects
      (``occasions=(1, 300)``) and many subjects are cheap: panels of more than 100 rows
      (or subjects) take their row values from a numpy generator seeded by hypothesis, so
      they shrink by size but not value by value.
    - ``id_kinds`` / ``time_kinds``: drawn from; see :data:`ALL_ID_KINDS`, and
      :data:`ALL_TIME_KINDS` and :data:`EDGE_TIME_KINDS` (opt-in only) for every
      choice.  The time kinds outside the defaults:

      - ``"timedelta"`` (hours), ``"nullable_int"`` (``Int64``), ``"arrow_timestamp"``
        (``timestamp[ns][pyarrow]``);
      - ``"datetime_s"``, ``"datetime_ms"``, ``"datetime_us"``: naive ``datetime64`` in
        that unit, each subject starting anywhere in the years 1000-9999 (exactly at
        1000-01-01, ending exactly at the last tick of 9999-12-31, straddling the limits
        of ``datetime64[ns]`` (1677-09-21, 2262-04-11) or 1970-01-01, or in between);
        the time between occasions is 1 to 40 steps of one day, hour, second or tick
        (one step for the whole panel);
      - ``"date_objects"``: an object column of :class:`datetime.date` and
        ``"arrow_date"``: ``date32[pyarrow]``, with days drawn as for ``"datetime_s"``;
      - ``"huge_int"``: ``int64`` times beyond 2**53, 1 to 40 apart, each subject starting
        at ±2**60, at 2**62, anywhere in [2**59, 2**61], straddling 2**53, or ending at the
        int64 maximum or starting at the int64 minimum (so times 1 apart are equal as
        float64 and differences across subjects overflow int64);
      - ``"decimal"``: ``float64`` times that are short decimals, k/10 or k/100 (one
        denominator per panel, e.g. 0.1, 0.3, 2.35, -1.2), in some panels near 10**8
        (k/10) or 10**7 (k/100), e.g. 100000000.3, where the differences of the binary
        values drift further from the decimal ones.
    - ``id_parts``: ``(min, max)`` number of id columns (``None``, the default: the id
      follows ``id_kinds``).  With it the id is ``pid`` for one part, else the columns
      ``id1`` ... ``idk``, each of a dtype drawn from ``id_kinds`` (``"multi"`` aside):
      mixed dtypes; each part alone repeats across subjects (only the whole id tells
      them apart) and some parts are constant; integer parts start at 0, 1000, 2**62
      or the int64 minimum; string parts use the empty string, blanks, case and accent
      variants (composed and decomposed), "nan", "None", "NA" and non-Latin text;
      categorical parts order their categories unlike the text and sometimes carry
      65,537 unused categories.
    - ``missing``: ``y`` has missing values; with ``all_missing`` too some subjects have
      ``y`` missing on every row.
    - ``extremes``: ``y`` also takes very large and very small magnitudes (±1e12,
      ±1e-12) and -0.0.
    - ``value_range``: ``"normal"`` (the default) or ``"extreme"`` (see
      :data:`VALUE_RANGES`).  ``"extreme"`` mixes into ``y`` the float64 limits (±1e308,
      the largest finite float, ±1e300, ±1e-308, the smallest normal float, subnormals
      such as ±5e-324) and -0.0, and scales the ordinary ``y`` values of each subject by
      1, 1e12, 1e300 or 1e-300; mixes into ``x`` (int64) integers beyond 2**53
      (2**53 + 1, 2**60 + 1, any int64, ...) and the int64 limits; and into ``dose``
      1e308, the largest float, 1e-308 and 5e-324 (still non-negative, never missing).
      Values are finite: no inf.
    - ``shuffle``: rows in random order.
    - ``index_kinds``: the row labels drawn from :data:`INDEX_KINDS`; by default string
      or non-contiguous integer labels when shuffled, 0..n-1 otherwise.
    - ``value_kinds``: storage of ``y``, ``x`` and ``flag`` drawn from
      :data:`VALUE_KINDS` (numpy by default).

    >>> from hypothesis import find, settings
    >>> case = find(panels(time_kinds=("datetime_s",), id_parts=(3, 3)),
    ...             lambda c: c.frame["t"].dt.year.min() == 1000, settings=settings(database=None))
    >>> case.id, str(case.frame["t"].dtype)
    (['id1', 'id2', 'id3'], 'datetime64[s]')
    """
    id_kinds = _check("id_kinds", id_kinds, ALL_ID_KINDS)
    time_kinds = _check("time_kinds", time_kinds, (*ALL_TIME_KINDS, *EDGE_TIME_KINDS))
    value_kinds = _check("value_kinds", value_kinds, VALUE_KINDS)
    if value_range not in VALUE_RANGES:
        raise ValueError(f"value_range must be one of {list(VALUE_RANGES)}, got {value_range!r}")
    extreme = value_range == "extreme"
    if index_kinds is not None:
        index_kinds = _check("index_kinds", index_kinds, INDEX_KINDS)
    part_kinds: list[str] = []
    if id_parts is not None:
        id_parts = _range("id_parts", id_parts, 1)
        part_kinds = [k for k in id_kinds if k != "multi"]
        if not part_kinds:
            raise ValueError("id_parts needs at least one single-column kind in id_kinds, not only 'multi'")
    rng: np.random.Generator | None = None
    n_sub = draw(st.integers(*subjects))
    if n_sub > _BULK:
        rng = np.random.default_rng(draw(st.integers(0, 2**64 - 1)))
    sizes = _lists(draw, rng, n_sub, st.integers(*occasions),
                   lambda r, k: r.integers(occasions[0], occasions[1], k, endpoint=True))
    n = int(sum(sizes))
    if rng is None and n > _BULK:
        rng = np.random.default_rng(draw(st.integers(0, 2**64 - 1)))
    id_kind = draw(st.sampled_from(id_kinds)) if id_parts is None else "parts"
    time_kind = draw(st.sampled_from(time_kinds))
    value_kind = draw(st.sampled_from(value_kinds))
    sizes = np.asarray(sizes, dtype=np.int64)
    sub = np.repeat(np.arange(n_sub), sizes).astype(np.int64)
    # strictly increasing times within subject: cumulative positive gaps from a subject's own start
    g = np.array(_lists(draw, rng, n, st.integers(1, 40), lambda r, k: r.integers(1, 41, k)), dtype=np.int64)
    starts = np.r_[0, np.cumsum(sizes)[:-1]].astype(np.int64) if n_sub else np.zeros(0, dtype=np.int64)
    cum = np.cumsum(g)
    offset = np.repeat(cum[starts] - g[starts], sizes) if n else cum
    start_time = np.repeat(np.array(_lists(draw, rng, n_sub, st.integers(-20, 20), lambda r, k: r.integers(-20, 21, k)),
                                    dtype=np.int64), sizes)
    t = cum - offset + start_time

    values = st.one_of(st.floats(-1e3, 1e3, allow_nan=False, width=32).map(float),
                       st.sampled_from([0.0, 1.0, -1.0]))  # the small set makes ties common
    sample_values = [lambda r, k: r.uniform(-1e3, 1e3, k).astype(np.float32), _pool([0.0, 1.0, -1.0])]
    if extremes:
        values = st.one_of(values, st.sampled_from(_EXTREMES))
        sample_values.append(_pool(_EXTREMES))
    if extreme:
        values = st.one_of(values, st.sampled_from(_FLOAT_EDGES))
        sample_values.append(_pool(_FLOAT_EDGES))
    if missing:
        values = st.one_of(values, st.just(float("nan")))
        sample_values.append(_pool([np.nan]))
    y = np.array(_lists(draw, rng, n, values, _mix(*sample_values)), dtype="float64")
    if extreme and n_sub:
        scale = np.repeat(np.array(_lists(draw, rng, n_sub, st.sampled_from(_SCALES), _pool(_SCALES))), sizes)
        ordinary = (np.abs(y) >= 1e-3) & (np.abs(y) <= 1e3)
        y[ordinary] *= scale[ordinary]
    if missing and all_missing and n_sub:
        blank = np.array(_lists(draw, rng, n_sub, st.sampled_from([False, False, False, True]),
                                lambda r, k: r.random(k) < 0.25), dtype=bool)
        y[np.repeat(blank, sizes)] = np.nan
    if extreme:
        x = _lists(draw, rng, n, st.one_of(st.integers(-5, 5), st.sampled_from(_INT_EDGES),
                                           st.integers(int(_I64.min), int(_I64.max))),
                   _mix(lambda r, k: r.integers(-5, 6, k), _pool(_INT_EDGES, np.int64),
                        lambda r, k: r.integers(_I64.min, _I64.max, k, dtype=np.int64, endpoint=True),
                        dtype=np.int64))
    else:
        x = _lists(draw, rng, n, st.integers(-5, 5), lambda r, k: r.integers(-5, 6, k))
    flag = _lists(draw, rng, n, st.booleans(), lambda r, k: r.random(k) < 0.5)
    doses = [0.0, 0.5, 1.0, 2.5, 10.0]
    if extreme:
        dose = _lists(draw, rng, n, st.one_of(st.sampled_from(doses), st.sampled_from(_DOSE_EDGES)),
                      _mix(_pool(doses), _pool(_DOSE_EDGES)))
    else:
        dose = _lists(draw, rng, n, st.sampled_from(doses), _pool(doses))
    x = np.array(x, dtype=np.int64)
    flag = np.array(flag, dtype=bool)
    dose = np.array(dose, dtype="float64")
    if value_kind == "numpy":
        frame = pd.DataFrame({"y": y, "x": x, "flag": flag, "dose": dose})
    elif value_kind == "nullable":
        frame = pd.DataFrame({"y": pd.array([None if np.isnan(v) else v for v in y], dtype="Float64"),
                              "x": pd.array(x, dtype="Int64"), "flag": pd.array(flag, dtype="boolean"),
                              "dose": dose})
    else:
        frame = pd.DataFrame({"y": pd.array([None if np.isnan(v) else v for v in y], dtype="double[pyarrow]"),
                              "x": pd.array(x, dtype="int64[pyarrow]"), "flag": pd.array(flag, dtype="bool[pyarrow]"),
                              "dose": dose})

    # times of the edge kinds: each subject's own steps after its first occasion, from an anchor
    rel = t - np.repeat(t[starts], sizes) if n else t
    spans = rel[starts + sizes - 1] if n else np.zeros(0, dtype=np.int64)
    if time_kind == "int":
        frame.insert(0, "t", t)
    elif time_kind == "float":
        frame.insert(0, "t", t * 0.5)
    elif time_kind == "nullable_int":
        frame.insert(0, "t", pd.array(t, dtype="Int64"))
    elif time_kind == "timedelta":
        frame.insert(0, "t", pd.to_timedelta(t, unit="h"))
    elif time_kind in _TICKS:
        per_second = _TICKS[time_kind]
        step = draw(st.sampled_from([86_400 * per_second, 3_600 * per_second, per_second, 1]))
        anchors = _anchors(draw, rng, spans * step, _FIRST_SECOND * per_second,
                           (_LAST_SECOND + 1) * per_second - 1,
                           [_NS_FIRST_SECOND * per_second, _NS_LAST_SECOND * per_second, 0])
        ticks = np.repeat(anchors, sizes) + rel * step
        frame.insert(0, "t", ticks.astype(f"datetime64[{time_kind.split('_')[1]}]"))
    elif time_kind in ("date_objects", "arrow_date"):
        marks = [_dt.date(1677, 9, 22).toordinal(), _dt.date(2262, 4, 11).toordinal(), _EPOCH_DAY]
        days = np.repeat(_anchors(draw, rng, spans, _FIRST_DAY, _LAST_DAY, marks), sizes) + rel
        dates = (days - _EPOCH_DAY).astype("datetime64[D]")
        if time_kind == "arrow_date":
            frame.insert(0, "t", pd.array(dates, dtype="date32[pyarrow]"))
        else:
            frame.insert(0, "t", pd.Series(dates.astype(object), index=frame.index, dtype=object))
    elif time_kind == "huge_int":
        firsts: list[int] = []
        for span in spans.tolist():
            special = [2**60, -(2**60), 2**62, 2**53 - span // 2, int(_I64.max) - span, int(_I64.min)]
            if rng is None:
                firsts.append(draw(st.one_of(st.sampled_from(special), st.integers(2**59, 2**61))))
            else:
                firsts.append(special[int(rng.integers(0, len(special)))] if rng.random() < 0.5
                              else int(rng.integers(2**59, 2**61, endpoint=True)))
        frame.insert(0, "t", np.repeat(np.array(firsts, dtype=np.int64), sizes) + rel)
    elif time_kind == "decimal":
        denominator = draw(st.sampled_from([10, 100]))
        shift = draw(st.sampled_from([0, 10**9]))
        frame.insert(0, "t", (t + shift) / denominator)
    else:
        ts = pd.Timestamp("2024-01-01") + pd.to_timedelta(t, unit="D")
        if time_kind == "datetime_tz":
            ts = ts.tz_localize("UTC").tz_convert("Europe/Berlin")
        elif time_kind == "arrow_timestamp":
            ts = pd.array(ts, dtype="timestamp[ns][pyarrow]")
        frame.insert(0, "t", ts)

    if id_kind == "int":
        frame.insert(0, "pid", sub * 7 + 3)
        id_: str | list[str] = "pid"
    elif id_kind == "str":
        frame.insert(0, "pid", [f"s{v:03d}" for v in sub])
        id_ = "pid"
    elif id_kind == "category":
        frame.insert(0, "pid", pd.Categorical([f"c{v}" for v in sub]))
        id_ = "pid"
    elif id_kind == "arrow_str":
        frame.insert(0, "pid", pd.array([f"s{v:03d}" for v in sub], dtype="string[pyarrow]"))
        id_ = "pid"
    elif id_kind == "nullable_int":
        frame.insert(0, "pid", pd.array(sub * 7 + 3, dtype="Int64"))
        id_ = "pid"
    elif id_kind == "parts":
        assert id_parts is not None
        k = draw(st.integers(*id_parts))
        kinds = draw(st.lists(st.sampled_from(part_kinds), min_size=k, max_size=k))
        radix = 1  # the parts are the digits of the subject number in this base: unique together only
        while radix**k < n_sub:
            radix += 1
        names = ["pid"] if k == 1 else [f"id{j + 1}" for j in range(k)]
        for j, (name, kind) in enumerate(zip(names, kinds)):
            frame.insert(j, name, _id_part(draw, kind, sub // radix ** (k - 1 - j) % radix))
        id_ = names[0] if k == 1 else names
    else:
        frame.insert(0, "site", np.where(sub % 2 == 0, "A", "B"))
        frame.insert(1, "pid", sub // 2)
        id_ = ["site", "pid"]

    if shuffle and n > 1:
        perm = list(draw(st.permutations(list(range(n))))) if rng is None else rng.permutation(n)
        frame = frame.iloc[perm]
    if index_kinds is None:
        index_kind = draw(st.sampled_from(["str", "int"])) if shuffle and n > 1 else "range"
    else:
        index_kind = draw(st.sampled_from(index_kinds))
    if index_kind == "range":
        frame = frame.reset_index(drop=True)
    elif index_kind == "str":
        frame.index = pd.Index([f"r{i}" for i in range(n)])
    elif index_kind == "int":
        frame.index = pd.Index(1000 - 3 * np.arange(n, dtype=np.int64))
    else:
        frame.index = pd.MultiIndex.from_arrays([np.arange(n) % 2, [f"r{i}" for i in range(n)]],
                                                names=["part", "row"])
    return PanelCase(frame, id_, "t")
