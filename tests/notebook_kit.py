"""Shared by the notebook tests: stored without outputs, executed against this checkout, outputs as text."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
NOTEBOOKS = ROOT / "notebooks"


def output_text(cell: Any) -> str:
    """What a code cell printed or displayed as text."""
    parts = []
    for out in cell.get("outputs", []):
        if out["output_type"] == "stream":
            parts.append(out["text"])
        elif out["output_type"] in ("execute_result", "display_data"):
            parts.append(out["data"].get("text/plain", ""))
    return "".join(parts)


def check_stored_clean(path: Path, calls: tuple[str, ...]) -> list[Any]:
    """The notebook is valid, stored without outputs, says its data are invented and makes ``calls``;
    returns its code cells."""
    import nbformat

    nb = nbformat.read(path, as_version=4)
    nbformat.validate(nb)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert all(c.outputs == [] and c.execution_count is None for c in code)
    assert "invented" in nb.cells[0].source.lower()
    source = "\n".join(c.source for c in code)
    for call in calls:
        assert call in source, call
    return code


def execute(path: Path) -> Any:
    """Run the notebook top to bottom (the kernel imports the panelfx of this checkout, whatever is
    installed); raises on the first failing cell and returns the executed notebook."""
    import nbclient
    import nbformat

    nb = nbformat.read(path, as_version=4)
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(NOTEBOOKS)}})
    before = os.environ.get("PYTHONPATH")
    os.environ["PYTHONPATH"] = os.pathsep.join([str(ROOT), *([before] if before else [])])
    try:
        client.execute()
    finally:
        if before is None:
            del os.environ["PYTHONPATH"]
        else:
            os.environ["PYTHONPATH"] = before
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert not [o for c in code for o in c.outputs if o["output_type"] == "error"]
    return nb
