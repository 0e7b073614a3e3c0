"""mypy --strict, with the pydantic plugin, passes on all of service/ (see pyproject.toml)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_mypy_strict_on_the_service() -> None:
    done = subprocess.run(
        [sys.executable, "-m", "mypy", "--no-incremental"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
        check=False,
    )
    assert done.returncode == 0, f"mypy found problems in service/:\n{done.stdout}"
