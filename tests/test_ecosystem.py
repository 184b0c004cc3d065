"""At home in the user's ecosystem (issue 17): reprs that show the call, hints for option
names carried over from pandas habits, a clean ``dir(panelfx)``."""

from __future__ import annotations

import dataclasses

import pytest
from catalogue import ENTRIES, entry_id, renamed

import panelfx as pfx

# ------------------------------------------------------------------------------------ repr


@pytest.mark.parametrize(("tr", "text"), [
    (pfx.lag("sbp"), "pfx.lag('sbp')"),
    (pfx.lag("sbp", 2), "pfx.lag('sbp', 2)"),
    (pfx.lag("sbp", 1), "pfx.lag('sbp')"),  # the default given explicitly is still the default
    (pfx.lag("sbp", offset="30D"), "pfx.lag('sbp', offset='30D')"),
    (pfx.rolling("sbp", "max", span="90D"), "pfx.rolling('sbp', 'max', span='90D')"),
    (pfx.rolling("sbp", occasions=3, min_valid=2), "pfx.rolling('sbp', occasions=3, min_valid=2)"),
    (pfx.change_from_baseline("y", "percent"), "pfx.change_from_baseline('y', 'percent')"),
    (pfx.baseline("sbp", where="on_drug"), "pfx.baseline('sbp', where='on_drug')"),
    (pfx.occasion(), "pfx.occasion()"),
])
def test_repr_is_the_constructor_call(tr, text):
    assert repr(tr) == text
    assert eval(text, {"pfx": pfx}) == tr


@pytest.mark.parametrize("item", ENTRIES, ids=entry_id)
def test_every_repr_rebuilds_the_transform(item):
    """For every catalogue configuration (and renamed outputs): the repr is the public
    constructor's call, it evaluates to an equal transform, and the saved options (JSON) are
    the dataclass fields as before."""
    type_name, entry = item
    for tr in (entry.example(), renamed(entry.example(), 3)):
        text = repr(tr)
        assert text.startswith(f"pfx.{type_name}("), text
        rebuilt = eval(text, {"pfx": pfx})
        assert rebuilt == tr and hash(rebuilt) == hash(tr)
        assert tr.options() == {f.name: getattr(tr, f.name) for f in dataclasses.fields(tr)}
        assert pfx.Derivation(tr, id="pid", time="t").to_json() == pfx.Derivation(rebuilt, id="pid",
                                                                                  time="t").to_json()
