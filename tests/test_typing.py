"""The package is mypy-clean under --strict (project rule; see pyproject.toml [tool.mypy])."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_mypy_strict_clean() -> None:
    """Common practice: typed code is checked, so a type regression fails the suite."""
    pytest.importorskip("mypy")
    result = subprocess.run(
        [sys.executable, "-m", "mypy", "--no-incremental"], cwd=ROOT, capture_output=True, text=True
    )
    assert result.returncode == 0, result.stdout + result.stderr
