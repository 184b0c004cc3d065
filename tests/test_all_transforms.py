"""Every registered transform, through the correctness kit (panelfx.testing).

The catalogue (tests/catalogue.py) gives example configurations per transform type; the
tests here run each type against the simple reference on generated panels, check the
past-only claims with ``assert_past_only``, the within-subject invariants, the saved
options round trip, and that several transforms in one ``derive`` give what each gives
alone.  A registered type without a catalogue entry or a reference fails the first test.
"""

from __future__ import annotations

import dataclasses
import json

import pytest
from catalogue import CATALOGUE, ENTRIES, NUMERIC_TIMES, Entry, numeric_time, renamed
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx._transform import REGISTRY, Transform
from panelfx.testing import (
    assert_constant_within,
    assert_matches_reference,
    assert_non_decreasing_within,
    assert_past_only,
    reference,
)
from panelfx.testing.reference import REFERENCES, missing_references
from panelfx.testing.strategies import panels

TYPES = sorted(REGISTRY)


def test_every_transform_type_is_covered():
    """Each registered transform type has a catalogue entry and a reference implementation."""
    uncatalogued = sorted(set(REGISTRY) - {t for t, es in CATALOGUE.items() if es})
    no_reference = missing_references()
    assert not uncatalogued, f"add example configurations to tests/catalogue.py for: {uncatalogued}"
    assert not no_reference, f"add reference implementations (panelfx/testing/reference/) for: {no_reference}"
    stale = sorted(set(CATALOGUE) - set(REGISTRY))
    assert not stale, f"catalogue entries for unregistered transform types: {stale}"


def test_every_public_transform_is_registered():
    """Each transform constructor exported by panelfx builds a registered type."""
    for t, entries in CATALOGUE.items():
        for e in entries:
            tr = e.example()
            assert isinstance(tr, Transform) and REGISTRY[tr.type_name] is type(tr), e.label
            assert tr.type_name == t, e.label


def _draw(data: st.DataObject, type_name: str) -> tuple[Entry, object, Transform]:
    entries = CATALOGUE.get(type_name)
    if not entries:
        pytest.skip(f"no catalogue entry for {type_name!r} (test_every_transform_type_is_covered fails)")
    entry = data.draw(st.sampled_from(entries), label="entry")
    case = data.draw(panels(time_kinds=entry.time_kinds), label="panel")
    return entry, case, entry.make(case)


# Half the profile's examples per transform type for each of the two per-type tests: with
# ~15 types that is a few hundred in CI, tens of thousands under PANELFX_THOROUGH=1.
PER_TYPE = settings(max_examples=max(10, settings.default.max_examples // 2))


@pytest.mark.parametrize("type_name", TYPES)
@PER_TYPE
@given(data=st.data())
def test_matches_reference(type_name, data):
    """derive() equals the per-subject loop reference for each catalogued configuration."""
    entry, case, tr = _draw(data, type_name)
    frame = entry.frame(case)
    tables = entry.tables_for(frame, case)
    got = pfx.derive(frame, tr, **case.keys, tables=tables)
    want = reference(frame, tr, **case.keys, tables=tables)
    assert_matches_reference(got, want, list(tr.outputs()), rtol=entry.rtol, id=case.id, time=case.time)


@pytest.mark.parametrize("type_name", TYPES)
@PER_TYPE
@given(data=st.data())
def test_invariants_and_past_only(type_name, data):
    """Constant / non-decreasing outputs hold on generated panels; past-only claims hold
    when later occasions are cut off (assert_past_only)."""
    entry, case, tr = _draw(data, type_name)
    frame = entry.frame(case)
    tables = entry.tables_for(frame, case)
    got = pfx.derive(frame, tr, **case.keys, tables=tables)
    for k in entry.constant:
        assert_constant_within(got, tr.outputs()[k], id=case.id)
    for k in entry.non_decreasing:
        assert_non_decreasing_within(got, tr.outputs()[k], **case.keys)
    if tr.past_only:
        assert_past_only(frame, tr, **case.keys, max_ranks=None, tables=tables)


@pytest.mark.parametrize(("type_name", "entry"), ENTRIES, ids=[e.label for _, e in ENTRIES])
def test_options_round_trip(type_name, entry):
    """A transform rebuilt from its saved options (plain JSON values) equals the original,
    and it describes itself in words."""
    tr = entry.example()
    options = json.loads(json.dumps(tr.options()))
    again = type(tr)(**{k: tuple(v) if isinstance(getattr(tr, k), tuple) else v for k, v in options.items()})
    assert again == tr
    assert isinstance(tr.past_only, bool)
    assert isinstance(tr.describe(), str) and tr.describe()
    assert len(tr.outputs()) >= 1 and len(set(tr.outputs())) == len(tr.outputs())
    assert all(isinstance(c, str) for c in tr.inputs())
    with pytest.raises(dataclasses.FrozenInstanceError):
        tr.name = "other"  # type: ignore[misc]


@settings(max_examples=max(10, settings.default.max_examples // 2))
@given(case=panels())
def test_many_transforms_in_one_derive(case):
    """One derive with every catalogued configuration (sharing one panel ordering and its
    caches) gives each output exactly as that transform alone gives it."""
    frame = case.frame
    for prepare in dict.fromkeys(e.prepare for _, e in ENTRIES if e.prepare is not None):
        frame = prepare(frame, case)
    tables: dict = {}
    for _, e in ENTRIES:
        tables.update(e.tables_for(frame, case) or {})
    chain = []
    seen: set[str] = set(frame.columns)
    for i, (_, entry) in enumerate(ENTRIES):
        if set(entry.time_kinds) <= set(NUMERIC_TIMES) and not numeric_time(case):
            continue
        tr = renamed(entry.make(case), i)
        if seen.isdisjoint(tr.outputs()):
            chain.append(tr)
            seen.update(tr.outputs())
    together = pfx.derive(frame, *chain, **case.keys, tables=tables)
    assert list(together.columns) == [*frame.columns, *[c for tr in chain for c in tr.outputs()]]
    for tr in chain:
        alone = pfx.derive(frame, tr, **case.keys, tables=tables)
        assert_matches_reference(together, alone, list(tr.outputs()), rtol=0, atol=0, id=case.id, time=case.time)


def test_reference_table_only_names_registered_types():
    """Every reference function is registered under an existing transform type."""
    missing_references()  # loads every reference module
    assert set(REFERENCES) <= set(REGISTRY), sorted(set(REFERENCES) - set(REGISTRY))
