"""``DataFrame.pfx``: registered on import of panelfx and delegating to the same functions."""

from __future__ import annotations

import pandas as pd
import pytest

import panelfx as pfx


def _frame() -> pd.DataFrame:
    # Invented visits, rows out of order.
    return pd.DataFrame({"pid": [2, 1, 1, 2], "day": [0, 30, 0, 30], "sbp": [150.0, 141.0, 148.0, 152.0]},
                        index=[10, 11, 12, 13])


def test_registered_on_import():
    assert isinstance(pd.DataFrame().pfx, pfx.accessor.PanelAccessor)


def test_derive_and_check_delegate():
    df = _frame()
    trs = (pfx.baseline("sbp"), pfx.lag("sbp"))
    pd.testing.assert_frame_equal(df.pfx.derive(*trs, id="pid", time="day"), pfx.derive(df, *trs, id="pid", time="day"))
    dup = pd.concat([df, df.iloc[[0]]])
    pd.testing.assert_frame_equal(dup.pfx.check(id="pid", time="day", notes=True),
                                  pfx.check(dup, id="pid", time="day", notes=True))
    with pytest.raises(pfx.DuplicateOccasionError):
        dup.pfx.derive(*trs, id="pid", time="day")


def test_apply_provenance_and_dictionary(tmp_path):
    d = pfx.Derivation(pfx.change_from_baseline("sbp"), pfx.within_between("sbp"), id="pid", time="day")
    out = _frame().pfx.apply(d)
    pd.testing.assert_frame_equal(out, d.apply(_frame()))
    assert out.pfx.derivation == d
    pd.testing.assert_frame_equal(out.pfx.dictionary(), d.dictionary(_frame()))
    assert out.pfx.provenance["derivation"] == d.to_dict()
    d.save(tmp_path / "d.json")
    pd.testing.assert_frame_equal(_frame().pfx.apply(tmp_path / "d.json"), out)
    pd.testing.assert_frame_equal(_frame().pfx.apply(str(tmp_path / "d.json")), out)


def test_errors():
    with pytest.raises(pfx.OptionError, match="no panelfx provenance"):
        _frame().pfx.dictionary()
    with pytest.raises(pfx.OptionError, match="needs a panelfx.Derivation"):
        _frame().pfx.apply(pfx.lag("sbp"))


def test_every_option_passes_through():
    """The accessor takes derive's and apply's options (keep=, rows=, order=, unit=, ...) and
    refuses an unknown one with derive's typed hint."""
    df = _frame().assign(seq=[1, 1, 1, 1])
    trs = (pfx.lag("sbp"), pfx.gap())
    for options in ({"keep": "new"}, {"rows": "by_subject"}, {"order": "seq"}, {"time_unit": "D", "unit": "W"}):
        pd.testing.assert_frame_equal(df.pfx.derive(*trs, id="pid", time="day", **options),
                                      pfx.derive(df, *trs, id="pid", time="day", **options))
    d = pfx.Derivation(*trs, id="pid", time="day")
    pd.testing.assert_frame_equal(df.pfx.apply(d, keep="new", rows="by_subject"),
                                  d.apply(df, keep="new", rows="by_subject"))
    with pytest.raises(pfx.UnknownOptionError, match="derive\\(\\) has no option groupby="):
        df.pfx.derive(*trs, id="pid", time="day", groupby="pid")
