"""A real browser loads /docs from a live server with every outside host unreachable.

Headless Chromium (Debian's package, installed by .ci/run) renders the page with name
resolution for any host but the loopback address refused, as on an isolated network: the
operations must appear in the rendered page and the screenshot must not be blank.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from live_server import running

pytestmark = [pytest.mark.server, pytest.mark.slow]

BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")
ISOLATED = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-dev-shm-usage",
    "--no-first-run",
    "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1",
    "--virtual-time-budget=15000",
    "--window-size=1200,900",
]


def _browser(*arguments: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    assert BROWSER is not None
    return subprocess.run(
        [BROWSER, *ISOLATED, f"--user-data-dir={cwd / 'profile'}", *arguments],
        capture_output=True,
        text=True,
        timeout=120,
        cwd=cwd,
        check=False,
    )


@pytest.mark.skipif(BROWSER is None, reason="no chromium on this machine (.ci/run installs it)")
def test_docs_render_offline_in_a_browser(tmp_path: Path) -> None:
    from PIL import Image

    with running(tmp_path) as server:
        page = f"{server.url}/docs"
        dom = _browser("--dump-dom", page, cwd=tmp_path)
        assert "/v1/forecasts" in dom.stdout, dom.stderr[-2000:]
        shot = tmp_path / "docs.png"
        _browser(f"--screenshot={shot}", page, cwd=tmp_path)
    assert shot.exists()
    with Image.open(shot) as image:
        colours = image.convert("RGB").getcolors(maxcolors=1_000_000)
    assert colours is not None and len(colours) > 20, "the screenshot is blank"
