"""Large saved derivations load in time linear in their size.

The files are generated here from the catalogue of every transform type (renamed so that
20,000 of them can share one derivation); no timing assertion: the work is counted in
Python function calls, which must about double when the file doubles.
"""

from __future__ import annotations

import sys

import pytest
from catalogue import ENTRIES, renamed

from panelfx import Derivation


def _many(n: int) -> Derivation:
    """n transforms cycling through every catalogue entry, outputs renamed to be unique."""
    base = [entry.build(True) for _, entry in ENTRIES]
    return Derivation(*(renamed(base[i % len(base)], i) for i in range(n)), id="id", time="t")


def _calls(work) -> int:
    """Python and builtin function calls made by ``work()`` (a count of work, not of time)."""
    count = 0

    def profile(frame, event, arg):
        nonlocal count
        if event in ("call", "c_call"):
            count += 1

    sys.setprofile(profile)
    try:
        work()
    finally:
        sys.setprofile(None)
    return count


def test_twenty_thousand_transforms_load():
    """A 20,000-transform file (as saved) loads and equals what was saved."""
    d = _many(20_000)
    text = d.to_json()
    assert Derivation.from_json(text) == d
    assert len(Derivation.from_json(text).outputs()) >= 20_000


@pytest.mark.parametrize("step", ["load", "build"])
def test_work_is_linear_in_the_number_of_transforms(step):
    """Twice the transforms cost about twice the work (it was quadratic: the check that an input is
    not made by a later transform rescanned the rest of the list for every input read from the frame)."""
    small, large = _many(1_000), _many(2_000)
    if step == "load":
        texts = small.to_json(), large.to_json()
        Derivation.from_json(texts[0])  # warm caches (annotations resolved once per class)
        a, b = (_calls(lambda t=t: Derivation.from_json(t)) for t in texts)
    else:
        a, b = (_calls(lambda d=d: Derivation(*d.transforms, id="id", time="t")) for d in (small, large))
    assert 1.8 < b / a < 2.3, (a, b)
