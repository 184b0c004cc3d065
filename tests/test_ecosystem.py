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


# ----------------------------------------------------------------------- frame-level options

FRAME_FUNCTIONS = ["derive", "check", "collapse_ties", "visit_grid", "episodes", "person_time", "snapshot",
                   "subject_summary", "variance_components", "design_effect", "grid", "windows"]


@pytest.mark.parametrize("name", FRAME_FUNCTIONS)
def test_frame_functions_check_their_options(name):
    """The functions that take a whole frame refuse a pandas-habit keyword with the typed error
    and its hint, before any work, as the transform constructors do."""
    func = getattr(pfx, name)
    with pytest.raises(pfx.UnknownOptionError, match=rf"^{name}\(\) has no option groupby=.*derive\(id=") as err:
        func(groupby="pid")
    assert isinstance(err.value, TypeError)


# ---------------------------------------------------------------------------- typed options


def _choice_options():
    """(entry, option, Literal values) for every Literal-typed option of a public constructor."""
    import typing

    from panelfx._transform import constructor

    seen, out = set(), []
    for _, entry in ENTRIES:
        tr = entry.build(True)
        func = constructor(type(tr))
        hints = typing.get_type_hints(func)
        for p, hint in hints.items():
            # Literal[...] itself, or inside Optional (Literal[...] | None)
            arms = [hint] if typing.get_origin(hint) is typing.Literal else typing.get_args(hint)
            values = tuple(v for arm in arms if typing.get_origin(arm) is typing.Literal for v in typing.get_args(arm))
            if values and (type(tr), p) not in seen:
                seen.add((type(tr), p))
                out.append(pytest.param(tr, p, values, id=f"{tr.type_name}.{p}"))
    return out


CHOICES = _choice_options()


def test_option_values_are_typed():
    """Editors offer option values and type checkers catch kind='pct': every option that takes
    one of a few words is a Literal in the constructor's signature."""
    found = {p.id for p in CHOICES}
    for must in ["change_from_baseline.kind", "change_from_baseline.rule", "change_from_previous.kind",
                 "baseline.rule", "cumulative.method", "cumulative.missing", "rolling.stat", "rolling.closed",
                 "time_since.which", "within_between.between", "within_between.codes", "as_of.direction",
                 "table_window.stat", "exposure.stat", "study_day.convention", "visit_pick.rule"]:
        assert must in found


@pytest.mark.parametrize(("tr", "option", "values"), CHOICES)
def test_literal_types_match_the_checked_choices(tr, option, values):
    """The Literal in the signature lists exactly the words the transform accepts: a word
    outside it is refused with a message listing the same words."""
    with pytest.raises(pfx.OptionError, match=f"{option} must be one of") as err:
        dataclasses.replace(tr, **{option: "not_a_choice"})
    listed = str(err.value).split("must be one of ")[1].split("]")[0] + "]"
    assert sorted(eval(listed)) == sorted(values)


# ------------------------------------------------------------------------------ default names


@pytest.mark.parametrize("item", ENTRIES, ids=entry_id)
def test_default_names_are_formula_safe(item):
    """Every default output name of every catalogue entry is a Python identifier (so model
    formulas take it unquoted; statsmodels/patsy parse formula terms as Python), its derived part
    is lower case, and the column comes first."""
    import keyword
    import re

    _, entry = item
    for numeric in (True, False):
        tr = entry.build(numeric)
        if getattr(tr, "name", None) is not None or getattr(tr, "names", None) is not None:
            continue
        for out in tr.outputs():
            assert out.isidentifier() and not keyword.iskeyword(out), out
            assert re.fullmatch(r"[a-z0-9_]+", out), out  # the catalogue's columns are lower case too
            first = getattr(tr, "col", None) or getattr(tr, "dose", None) or getattr(tr, "table", None)
            if isinstance(first, str):
                assert out.startswith(first + "_"), out


def test_default_names_work_in_a_statsmodels_formula():
    """The default names go straight into a statsmodels formula (the outside check: patsy parses
    the terms), including a span of 2.5 and a percent change."""
    import numpy as np
    import pandas as pd
    import statsmodels.formula.api as smf

    rng = np.random.default_rng(7)  # invented: 30 people, 6 weekly weights
    df = pd.DataFrame({"pid": np.repeat(np.arange(30), 6), "wk": np.tile(np.arange(6.0), 30)})
    df["kg"] = 80 + rng.normal(0, 3, 30).repeat(6) - 0.2 * df["wk"] + rng.normal(0, 0.5, len(df))
    out = pfx.derive(df, pfx.rolling("kg", span=2.5), pfx.change_from_baseline("kg", "percent"),
                     pfx.lag("kg"), id="pid", time="wk")
    fit = smf.ols("kg_percent_change ~ kg_mean_2p5 + kg_lag1", data=out).fit()
    assert set(fit.params.index) == {"Intercept", "kg_mean_2p5", "kg_lag1"}
