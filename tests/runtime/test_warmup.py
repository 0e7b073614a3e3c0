"""The fork server's warm-up loads what a job imports on first use: every module of
service.core and each library module that core imports inside a function."""

from __future__ import annotations

import ast
import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
CORE = ROOT / "service" / "core"


def deferred_imports() -> set[str]:
    """The third-party modules (and imported submodules) core imports inside functions."""
    found: set[str] = set()
    for path in CORE.rglob("*.py"):
        for function in ast.walk(ast.parse(path.read_text())):
            if not isinstance(function, (ast.FunctionDef, ast.AsyncFunctionDef)):
                continue
            for node in ast.walk(function):
                if isinstance(node, ast.Import):
                    found.update(alias.name for alias in node.names)
                elif isinstance(node, ast.ImportFrom) and node.module and not node.level:
                    found.add(node.module)
                    found.update(f"{node.module}.{alias.name}" for alias in node.names)
    return {name for name in found if not name.startswith("service")}


def test_the_warm_up_loads_every_module_a_job_imports_late() -> None:
    wanted = sorted(deferred_imports())
    assert any(name.startswith("statsmodels") for name in wanted)  # the check has work to do
    source = (
        "import json, sys\n"
        "import service.runtime.warmup\n"
        f"wanted = {wanted!r}\n"
        "def loaded(name):  # a module, or a name defined by a loaded module\n"
        "    parent, _, leaf = name.rpartition('.')\n"
        "    return name in sys.modules or hasattr(sys.modules.get(parent), leaf)\n"
        "missing = [n for n in wanted if not loaded(n)]\n"
        "core = [m for m in sys.modules if m.startswith('service.core')]\n"
        "print(json.dumps({'missing': missing, 'core': len(core)}))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", source], cwd=ROOT, capture_output=True, text=True, timeout=300
    )
    assert done.returncode == 0, done.stderr[-3000:]
    found = json.loads(done.stdout.strip().splitlines()[-1])
    assert found["missing"] == []
    assert found["core"] >= len(list(CORE.rglob("*.py")))
