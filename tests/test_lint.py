"""ruff check and ruff format --check pass on service and tests (the venv's ruff)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
RUFF = Path(sys.executable).parent / "ruff"


@pytest.mark.parametrize("args", [["check"], ["format", "--check"]], ids=["check", "format"])
def test_ruff_passes(args: list[str]) -> None:
    assert RUFF.exists(), f"no ruff beside {sys.executable}; install the test extras"
    done = subprocess.run(
        [str(RUFF), *args, "--no-cache", "service", "tests"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert done.returncode == 0, (
        f"ruff {' '.join(args)} failed; run `ruff check --fix service tests` and "
        f"`ruff format service tests`:\n{done.stdout}\n{done.stderr}"
    )
