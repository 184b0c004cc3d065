"""``DataFrame.px``: registered on import of panelfx and delegating to the same functions."""

from __future__ import annotations

import pandas as pd
import pytest

import panelfx as px


def _frame() -> pd.DataFrame:
    # Invented visits, rows out of order.
    return pd.DataFrame({"pid": [2, 1, 1, 2], "day": [0, 30, 0, 30], "sbp": [150.0, 141.0, 148.0, 152.0]},
                        index=[10, 11, 12, 13])


def test_registered_on_import():
    assert isinstance(pd.DataFrame().px, px.accessor.PanelAccessor)


def test_derive_and_check_delegate():
    df = _frame()
    trs = (px.baseline("sbp"), px.lag("sbp"))
    pd.testing.assert_frame_equal(df.px.derive(*trs, id="pid", time="day"), px.derive(df, *trs, id="pid", time="day"))
    dup = pd.concat([df, df.iloc[[0]]])
    pd.testing.assert_frame_equal(dup.px.check(id="pid", time="day", notes=True),
                                  px.check(dup, id="pid", time="day", notes=True))
    with pytest.raises(px.DuplicateOccasionError):
        dup.px.derive(*trs, id="pid", time="day")


def test_apply_provenance_and_dictionary(tmp_path):
    d = px.Derivation(px.change_from_baseline("sbp"), px.within_between("sbp"), id="pid", time="day")
    out = _frame().px.apply(d)
    pd.testing.assert_frame_equal(out, d.apply(_frame()))
    assert out.px.derivation == d
    pd.testing.assert_frame_equal(out.px.dictionary(), d.dictionary(_frame()))
    assert out.px.provenance["derivation"] == d.to_dict()
    d.save(tmp_path / "d.json")
    pd.testing.assert_frame_equal(_frame().px.apply(tmp_path / "d.json"), out)
    pd.testing.assert_frame_equal(_frame().px.apply(str(tmp_path / "d.json")), out)


def test_errors():
    with pytest.raises(px.OptionError, match="no panelfx provenance"):
        _frame().px.dictionary()
    with pytest.raises(px.OptionError, match="needs a panelfx.Derivation"):
        _frame().px.apply(px.lag("sbp"))
