"""The time-varying notebook runs from top to bottom and recovers the invented truths."""

from __future__ import annotations

import os
import re
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")
pytest.importorskip("statsmodels")

ROOT = Path(__file__).resolve().parent.parent
NOTEBOOKS = ROOT / "notebooks"
NOTEBOOK = NOTEBOOKS / "time_varying.ipynb"


def _text(cell) -> str:
    parts = []
    for out in cell.get("outputs", []):
        if out["output_type"] == "stream":
            parts.append(out["text"])
        elif out["output_type"] in ("execute_result", "display_data"):
            parts.append(out["data"].get("text/plain", ""))
    return "".join(parts)


def test_notebook_is_stored_without_outputs():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    nbformat.validate(nb)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert all(c.outputs == [] and c.execution_count is None for c in code)
    assert "invented" in nb.cells[0].source.lower()
    source = "\n".join(c.source for c in code)
    for call in ("pfx.episodes(", "pfx.person_time(", "pfx.snapshot(", "PHReg(", "sm.GLM("):
        assert call in source


@pytest.fixture(scope="module")
def text():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(NOTEBOOKS)}})
    # the kernel imports the panelfx under test (this checkout), whatever is installed
    before = os.environ.get("PYTHONPATH")
    os.environ["PYTHONPATH"] = os.pathsep.join([str(ROOT), *([before] if before else [])])
    try:
        client.execute()  # raises CellExecutionError on the first failing cell
    finally:
        if before is None:
            del os.environ["PYTHONPATH"]
        else:
            os.environ["PYTHONPATH"] = before
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert not [o for c in code for o in c.outputs if o["output_type"] == "error"]
    return "".join(_text(c) for c in code)


def number(text: str, pattern: str) -> float:
    m = re.search(pattern + r" (-?\d+\.\d+)", text)
    assert m, pattern
    return float(m.group(1))


def test_notebook_recovers_the_invented_truths(text):
    assert "INVENTED DATA" in text and "never start >= stop: True" in text and "Warning" not in text
    # truth log(2) = 0.693; standard error about 0.12 with ~270 deaths
    cox = number(text, r"log hazard ratio of the sedative, time-varying Cox on episodes:")
    assert cox == pytest.approx(0.693, abs=0.3)
    # the record made on the day of death, used for the interval the death closes, biases the estimate upward
    naive = number(text, r"log hazard ratio, naive intervals \(value at the stop\):")
    assert naive - cox > 0.25
    # truth 1.5; log rate ratio standard error about 0.075 with ~730 falls
    assert number(text, r"rate ratio of falls, Poisson model:") == pytest.approx(1.5, abs=0.3)
