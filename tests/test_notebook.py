"""The walkthrough notebook runs from top to bottom and finds the generator's true effects."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")
pytest.importorskip("statsmodels")
pytest.importorskip("matplotlib")

NOTEBOOKS = Path(__file__).resolve().parent.parent / "notebooks"
WALKTHROUGH = NOTEBOOKS / "walkthrough.ipynb"


def _text(cell) -> str:
    parts = []
    for out in cell.get("outputs", []):
        if out["output_type"] == "stream":
            parts.append(out["text"])
        elif out["output_type"] in ("execute_result", "display_data"):
            parts.append(out["data"].get("text/plain", ""))
    return "".join(parts)


def test_notebook_is_stored_without_outputs():
    nb = nbformat.read(WALKTHROUGH, as_version=4)
    nbformat.validate(nb)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert len(code) >= 8
    assert all(c.outputs == [] and c.execution_count is None for c in code)
    assert "invented" in nb.cells[0].source.lower()
    source = "\n".join(c.source for c in code)
    assert "pfx.Derivation(" in source and ".save(" in source and "Derivation.load(" in source


@pytest.fixture(scope="module")
def executed():
    nb = nbformat.read(WALKTHROUGH, as_version=4)
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(NOTEBOOKS)}})
    client.execute()  # raises CellExecutionError on the first failing cell
    return nb


def test_notebook_runs_without_error(executed):
    code = [c for c in executed.cells if c.cell_type == "code"]
    assert all(c.execution_count is not None for c in code)
    assert not [o for c in code for o in c.outputs if o["output_type"] == "error"]
    text = "".join(_text(c) for c in code)
    assert "INVENTED DATA" in text
    for problem in ("missed", "late", "early"):
        assert problem in text
    # the figures cell drew a picture
    assert any("image/png" in o.get("data", {}) for c in code for o in c.outputs)


def test_notebook_recovers_the_true_effects(executed):
    text = "".join(_text(c) for c in executed.cells if c.cell_type == "code")
    found = {m.group(1): float(m.group(2)) for m in
             re.finditer(r"^(within effect, mixed model|between effect, mixed model|within effect, GEE): "
                         r"(-?\d+\.\d+) \(truth", text, flags=re.M)}
    assert set(found) == {"within effect, mixed model", "between effect, mixed model", "within effect, GEE"}
    # truth: within -0.3, between +0.2 (panelfx.demo.cohort defaults); standard errors
    # are about 0.013 and 0.033 with 300 subjects
    assert found["within effect, mixed model"] == pytest.approx(-0.3, abs=0.05)
    assert found["within effect, GEE"] == pytest.approx(-0.3, abs=0.05)
    assert found["between effect, mixed model"] == pytest.approx(0.2, abs=0.1)
    # the naive OLS row of the results table is far from the within effect
    naive = re.search(r"naive: OLS on current dose\s+([-+]\d+\.\d+)", text)
    assert naive is not None and float(naive.group(1)) > -0.2


def test_readme_figure_is_committed_and_small():
    png = NOTEBOOKS / "figures" / "demo_cohort.png"
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert len(data) < 150_000
