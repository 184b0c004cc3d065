"""The README's two commands are exactly what CI runs."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text()
    section = text.split("## Set up, run the demo, run the tests", 1)[1]
    block = re.search(r"```bash\n(.*?)```", section, re.S)
    assert block, "the set-up section has no bash block"
    return [line for line in block.group(1).splitlines() if line.strip()]


def test_readme_gives_exactly_two_commands():
    assert len(readme_commands()) == 2


def test_ci_runs_both_readme_commands():
    ci = (ROOT / ".ci" / "run").read_text()
    for command in readme_commands():
        assert command in ci, f"CI does not run the README command {command!r}"
