"""The nested-data notebook runs top to bottom and finds the generator's known answers."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")
pytest.importorskip("statsmodels")
pytest.importorskip("matplotlib")
pytest.importorskip("sklearn")

NOTEBOOKS = Path(__file__).resolve().parent.parent / "notebooks"
NESTED = NOTEBOOKS / "nested.ipynb"


def _text(cell) -> str:
    parts = []
    for out in cell.get("outputs", []):
        if out["output_type"] == "stream":
            parts.append(out["text"])
        elif out["output_type"] in ("execute_result", "display_data"):
            parts.append(out["data"].get("text/plain", ""))
    return "".join(parts)


def test_notebook_is_stored_without_outputs():
    nb = nbformat.read(NESTED, as_version=4)
    nbformat.validate(nb)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert all(c.outputs == [] and c.execution_count is None for c in code)
    assert "invented" in nb.cells[0].source.lower()
    source = "\n".join(c.source for c in code)
    for call in ("pfx.variance_components(", "pfx.design_effect(", "levels=[", "pfx.grid(", "KMeans(",
                 "plot.profiles(", "plot.within_between(", "plot.trajectory_groups("):
        assert call in source, call


@pytest.fixture(scope="module")
def executed():
    nb = nbformat.read(NESTED, as_version=4)
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(NOTEBOOKS)}})
    client.execute()  # raises CellExecutionError on the first failing cell
    return nb


def test_notebook_runs_and_draws(executed):
    code = [c for c in executed.cells if c.cell_type == "code"]
    assert all(c.execution_count is not None for c in code)
    assert not [o for c in code for o in c.outputs if o["output_type"] == "error"]
    assert sum("image/png" in o.get("data", {}) for c in code for o in c.outputs) >= 3
    assert "INVENTED DATA" in "".join(_text(c) for c in code)


def test_notebook_finds_the_known_answers(executed):
    text = "".join(_text(c) for c in executed.cells if c.cell_type == "code")
    found = {m.group(1): float(m.group(2)) for m in
             re.finditer(r"^(within effect|between effect), mixed model: (-?\d+\.\d+) \(truth", text, flags=re.M)}
    # truth (panelfx.demo.rehab defaults): within -0.05, between -0.12; standard errors ~0.003 and ~0.01
    assert found["within effect"] == pytest.approx(-0.05, abs=0.01)
    assert found["between effect"] == pytest.approx(-0.12, abs=0.03)
    naive = re.search(r"naive OLS on exercise alone: (-?\d+\.\d+)", text)
    assert naive is not None and float(naive.group(1)) < -0.07  # far from the within effect
    ari = re.search(r"adjusted Rand index against the generator's patterns: (\d\.\d+)", text)
    assert ari is not None and float(ari.group(1)) > 0.9
    deff = re.search(r"design effect of the mean: (\d+\.\d+); (\d+) visits are worth (\d+) independent", text)
    assert deff is not None and float(deff.group(1)) > 10
    assert "parts add up to the value: True" in text


def test_readme_figures_are_committed_and_small():
    for name in ("nested_profiles.png", "nested_within_groups.png"):
        data = (NOTEBOOKS / "figures" / name).read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n"
        assert len(data) < 150_000
