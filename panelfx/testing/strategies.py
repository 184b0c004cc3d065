"""Hypothesis strategies for long-format panels (hypothesis is an optional dependency)."""

from __future__ import annotations

from typing import Any, NamedTuple, Sequence

import numpy as np
import pandas as pd

try:
    from hypothesis import strategies as st
except ImportError as err:  # pragma: no cover - exercised only without hypothesis
    raise ImportError(
        "panelfx.testing.strategies needs hypothesis: pip install hypothesis (or 'panelfx[test]')"
    ) from err


class PanelCase(NamedTuple):
    """A generated panel and its declaration, ready for ``derive(case.frame, ..., **case.keys)``."""

    frame: pd.DataFrame
    id: str | list[str]
    time: str

    @property
    def keys(self) -> dict[str, Any]:
        return {"id": self.id, "time": self.time}


ID_KINDS = ("int", "str", "category", "multi")
TIME_KINDS = ("int", "float", "datetime", "datetime_tz")


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
) -> PanelCase:
    """Panels with columns ``y`` (float, NaN allowed), ``x`` (int), ``flag`` (bool) and
    ``dose`` (non-negative float), unique occasions per subject, irregular times.

    Rows are shuffled and the index is a non-default one when ``shuffle`` is true.
    """
    n_sub = draw(st.integers(*subjects))
    sizes = draw(st.lists(st.integers(*occasions), min_size=n_sub, max_size=n_sub))
    n = sum(sizes)
    id_kind = draw(st.sampled_from(list(id_kinds)))
    time_kind = draw(st.sampled_from(list(time_kinds)))
    sub = np.repeat(np.arange(n_sub), sizes)
    # strictly increasing times within subject: cumulative positive gaps
    gaps = draw(st.lists(st.integers(1, 40), min_size=n, max_size=n))
    g = np.array(gaps, dtype=np.int64)
    starts = np.r_[0, np.cumsum(sizes)[:-1]].astype(np.int64)
    cum = np.cumsum(g)
    offset = np.repeat(cum[starts] - g[starts], sizes) if n else cum
    start_time = np.repeat(np.array(draw(st.lists(st.integers(-20, 20), min_size=n_sub, max_size=n_sub)),
                                    dtype=np.int64), sizes)
    t = cum - offset + start_time
    values = st.one_of(st.floats(-1e3, 1e3, allow_nan=False, width=32).map(float),
                       st.sampled_from([0.0, 1.0, -1.0]))
    if missing:
        values = st.one_of(values, st.just(float("nan")))
    y = draw(st.lists(values, min_size=n, max_size=n))
    x = draw(st.lists(st.integers(-5, 5), min_size=n, max_size=n))
    flag = draw(st.lists(st.booleans(), min_size=n, max_size=n))
    dose = draw(st.lists(st.sampled_from([0.0, 0.5, 1.0, 2.5, 10.0]), min_size=n, max_size=n))
    frame = pd.DataFrame({"y": y, "x": x, "flag": flag, "dose": dose})
    if time_kind == "int":
        frame.insert(0, "t", t)
    elif time_kind == "float":
        frame.insert(0, "t", t * 0.5)
    else:
        ts = pd.Timestamp("2024-01-01") + pd.to_timedelta(t, unit="D")
        frame.insert(0, "t", ts.tz_localize("UTC").tz_convert("Europe/Berlin") if time_kind == "datetime_tz" else ts)
    if id_kind == "int":
        frame.insert(0, "pid", sub * 7 + 3)
        id_: str | list[str] = "pid"
    elif id_kind == "str":
        frame.insert(0, "pid", [f"s{v:03d}" for v in sub])
        id_ = "pid"
    elif id_kind == "category":
        frame.insert(0, "pid", pd.Categorical([f"c{v}" for v in sub]))
        id_ = "pid"
    else:
        frame.insert(0, "site", np.where(sub % 2 == 0, "A", "B"))
        frame.insert(1, "pid", sub // 2)
        id_ = ["site", "pid"]
    if shuffle and n > 1:
        perm = draw(st.permutations(list(range(n))))
        frame = frame.iloc[list(perm)]
        frame.index = pd.Index([f"r{i}" for i in range(n)])
    return PanelCase(frame, id_, "t")
