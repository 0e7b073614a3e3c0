"""The HTTP server process loads neither statsmodels nor scipy: the families' implementations
load in the pool's workers (the registry's specifications import them when they fit), and
fitted models cross to the server as pickled bytes. Checked in fresh interpreters, since the
test process has imported everything."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
LIBRARIES = ("statsmodels", "scipy")

LOADED = f"""
import json, sys
def loaded():
    return sorted({{m.split(".")[0] for m in sys.modules}} & set({LIBRARIES!r}))
"""

IMPORT_ONLY = (
    LOADED
    + """
from service.api.app import create_app
from service.api import boot
create_app()
boot.create_app()
print(json.dumps(loaded()))
"""
)

REQUESTS = (
    LOADED
    + """
import tempfile
from pathlib import Path
from fastapi.testclient import TestClient
from service import demo
from service.api.app import create_app
from service.config import Settings

if __name__ == "__main__":  # the pool's fork server runs this module's top level too
    where = Path(tempfile.mkdtemp())
    settings = Settings(
        pool_workers=1, cache_dir=where / "cache", metrics_dir=where / "metrics",
        api_keys="", api_keys_file=None,
    )
    body = demo.request_body("orders", horizon=3)
    body["model"] = {"family": "ets", "error": "add", "trend": "none", "season": "none"}
    seen = {}
    with TestClient(create_app(settings), raise_server_exceptions=False) as client:
        seen["health"] = client.get("/healthz").status_code
        seen["catalogue"] = client.get("/v1/models").status_code
        seen["invalid"] = client.post("/v1/forecasts", json={**body, "horizon": 0}).status_code
        seen["computed"] = client.post("/v1/forecasts", json=body).status_code
        seen["hit"] = client.post("/v1/forecasts", json=body).headers["cache-status"]
        fit_store = client.post("/v1/forecasts", json={**body, "horizon": 4})
        seen["fit store"] = fit_store.headers["cache-status"]
        diagnostics = {"series": body["series"]}
        seen["diagnostics"] = client.post("/v1/diagnostics", json=diagnostics).status_code
    print(json.dumps({"seen": seen, "loaded": loaded()}))
"""
)


def run(source: str) -> object:
    done = subprocess.run(
        [sys.executable, "-c", source], cwd=ROOT, capture_output=True, text=True, timeout=300
    )
    assert done.returncode == 0, done.stderr[-3000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_building_the_apps_imports_neither_statsmodels_nor_scipy() -> None:
    assert run(IMPORT_ONLY) == []


def test_answering_requests_loads_neither_in_the_server_process() -> None:
    found = run(REQUESTS)
    assert isinstance(found, dict)
    assert found["seen"] == {
        "health": 200,
        "catalogue": 200,
        "invalid": 422,
        "computed": 200,
        "hit": "windvane-response; hit; detail=memory",
        "fit store": "windvane-fitted; hit, windvane-response; fwd=miss; stored",
        "diagnostics": 200,
    }
    assert found["loaded"] == []
