"""Running the tests or the service from the checkout leaves no untracked files."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest

from service.config import Settings

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.skipif(
    shutil.which("git") is None or not (ROOT / ".git").exists(), reason="not a git checkout"
)
def test_what_runs_write_in_the_checkout_is_ignored() -> None:
    fields = Settings.model_fields
    written = [
        f"{fields['cache_dir'].default}/ab/entry",  # `windvane serve` with the default settings
        f"{fields['metrics_dir'].default}/counter_1.db",  # ... with WINDVANE_WORKERS > 1
        ".schemathesis/default/cache/crashes",  # the contract fuzzer's store
        ".hypothesis/examples/entry",
        ".pytest_cache/v/cache/nodeids",
    ]
    done = subprocess.run(
        ["git", "check-ignore", "--no-index", *written],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=30,
        check=False,
    )
    ignored = set(done.stdout.split())
    assert ignored == set(written), sorted(set(written) - ignored)
