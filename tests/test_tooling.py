"""The linter and the type checker are clean on the package (configured in pyproject.toml)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", *args], cwd=ROOT, capture_output=True, text=True, timeout=600)


def test_ruff_is_clean():
    done = run("ruff", "check", "panelfx", "tests", "benchmarks", "--no-cache")
    assert done.returncode == 0, done.stdout + done.stderr


def test_mypy_is_clean():
    done = run("mypy", "--no-incremental", "--cache-dir", "/dev/null")
    assert done.returncode == 0, done.stdout + done.stderr
