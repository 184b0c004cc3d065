"""Property tests: baseline, change and lag transforms agree with the simple reference."""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.testing import assert_matches_reference, reference
from panelfx.testing.strategies import panels

TRANSFORMS = st.sampled_from([
    pfx.baseline("y"),
    pfx.baseline("y", "first"),
    pfx.baseline("x", "first_valid"),
    pfx.change_from_baseline("y"),
    pfx.change_from_baseline("y", "percent", after_baseline_only=True),
    pfx.change_from_baseline("y", "ratio", rule="first"),
    pfx.change_from_previous("y"),
    pfx.change_from_previous("y", "percent"),
    pfx.change_from_previous("y", "rate", skip_missing=True),
    pfx.change_from_previous("y", "difference", skip_missing=True),
    pfx.lag("y"),
    pfx.lag("y", 2),
    pfx.lag("x", -1),
    pfx.lag("flag", 1),
])


@settings(max_examples=150, deadline=None)
@given(case=panels(), tr=TRANSFORMS)
def test_matches_reference(case, tr):
    """Each history transform equals the per-subject loop reference on generated panels."""
    got = pfx.derive(case.frame, tr, **case.keys)
    want = reference(case.frame, tr, **case.keys)
    assert_matches_reference(got, want, list(tr.outputs()), rtol=1e-12)


@settings(max_examples=60, deadline=None)
@given(case=panels(time_kinds=("int", "float")))
def test_last_before_matches_reference(case):
    """The last non-missing value on or before a numeric reference time."""
    for tr in (pfx.baseline("y", "last_before", reference=10),
               pfx.change_from_baseline("y", rule="last_before", reference=10, after_baseline_only=True)):
        got = pfx.derive(case.frame, tr, **case.keys)
        assert_matches_reference(got, reference(case.frame, tr, **case.keys), list(tr.outputs()))
