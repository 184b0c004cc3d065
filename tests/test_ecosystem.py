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


# ------------------------------------------------------------------------ unknown options


@pytest.mark.parametrize(("call", "message", "hints"), [
    (lambda: pfx.rolling("sbp", window=3), "rolling() has no option window=; did you mean occasions= or span=?",
     ["occasions", "span"]),
    (lambda: pfx.rolling("sbp", "max", min_periods=2), "rolling() has no option min_periods=; did you mean "
     "min_valid=?", ["min_valid"]),
    (lambda: pfx.table_window("labs", "alt", "max", window="30D"), "table_window() has no option window=; did "
     "you mean span=?", ["span"]),
    (lambda: pfx.lag("sbp", fill_value=0), "lag() has no option fill_value= (missing values stay missing; "
     "pfx.carry_forward fills them from earlier occasions); its options are: col, periods, offset", []),
    (lambda: pfx.baseline("sbp", axis=0), "baseline() has no option axis= (transforms run down each subject's "
     "occasions; there is no axis)", []),
    (lambda: pfx.change_from_previous("sbp", periods=2), "change_from_previous() has no option periods=; its "
     "options are: col, kind, skip_missing, name", []),
    (lambda: pfx.as_of("labs", "alt", tolerance="30D"), "as_of() has no option tolerance=; did you mean within=?",
     ["within"]),
    (lambda: pfx.lag("sbp", skipmissing=True), "lag() has no option skipmissing=; did you mean skip_missing=?",
     ["skip_missing"]),  # a close spelling (difflib)
    (lambda: pfx.rolling("sbp", occasion=3), "did you mean occasions=?", ["occasions"]),
    (lambda: pfx.first_dose("doses", strat="start"), "first_dose() has no option strat=; did you mean start=?",
     ["start"]),
])
def test_unknown_options_name_the_one_meant(call, message, hints):
    with pytest.raises(pfx.UnknownOptionError) as err:
        call()
    assert message in str(err.value)
    assert isinstance(err.value, TypeError) and isinstance(err.value, pfx.PanelError)
    assert err.value.suggestions == hints and err.value.option in str(err.value)


def test_every_constructor_checks_its_options():
    """Each registered transform's public constructor refuses an unknown option with the typed
    error (a plain TypeError from Python would give no hint); known options still work."""
    from panelfx._transform import REGISTRY, constructor

    for name, cls in REGISTRY.items():
        func = getattr(pfx, name)
        assert constructor(cls) is func
        with pytest.raises(pfx.UnknownOptionError, match=rf"^{name}\(\) has no option min_periods="):
            func(min_periods=1)
    assert pfx.rolling("sbp", occasions=3, min_valid=2).min_valid == 2


# ------------------------------------------------------------------------------ namespace


def test_dir_shows_the_public_api_only():
    """Tab completion lists what is documented: every public name in dir(panelfx) is in
    __all__, every name of __all__ is there and resolves; no submodule is left as an attribute."""
    import types

    public = [n for n in dir(pfx) if not n.startswith("_")]
    assert sorted(public) == sorted(pfx.__all__)
    assert all(getattr(pfx, n) is not None for n in pfx.__all__)
    assert "__version__" in dir(pfx)
    leaked = [n for n, v in vars(pfx).items() if isinstance(v, types.ModuleType) and not n.startswith("_")
              and n not in pfx.__all__ and n not in {"plot", "testing", "cli", "demo", "dask", "sklearn"}]  # imported by other tests
    assert leaked == []
    assert "annotations" not in vars(pfx)


def test_submodules_still_import():
    """Dropping the attributes breaks no import style: ``import panelfx.errors`` then
    ``panelfx.errors.X``, ``from panelfx import errors``, ``import panelfx.derivation as d``."""
    import panelfx.errors
    from panelfx import derivation as d
    from panelfx import errors

    assert panelfx.errors.PanelError is errors.PanelError is pfx.PanelError
    assert d.Derivation is pfx.Derivation
    with pytest.raises(AttributeError, match="has no attribute 'lagg'"):
        pfx.lagg  # noqa: B018
