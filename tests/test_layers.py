"""Imports point one way: api -> runtime -> core, and core uses only the numerical stack.

Inside core the subpackages are layered too, each importing only its own layer and those
before it: the shared foundation (errors, checks, applicability) -> data -> diagnostics ->
models -> evaluation -> selection."""

from __future__ import annotations

import ast
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "service"
CORE_ALLOWED = {"numpy", "pandas", "scipy", "statsmodels"}


def package_of(path: Path) -> str:
    return ".".join(path.relative_to(ROOT.parent).with_suffix("").parts[:-1])


def imports_of(source: str, package: str) -> list[str]:
    """Every module a source imports, relative imports resolved against ``package``."""
    found: list[str] = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            found.extend(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                parts = package.split(".")
                base = parts[: len(parts) - node.level + 1]
                found.append(".".join([*base, node.module] if node.module else base))
            elif node.module:
                found.append(node.module)
    return found


def core_violations(names: list[str]) -> list[str]:
    """Imports a core module may not make: anything but stdlib, the stack and service.core."""
    bad = []
    for name in names:
        top = name.split(".")[0]
        if name == "service.core" or name.startswith("service.core."):
            continue
        if top == "__future__" or top in sys.stdlib_module_names or top in CORE_ALLOWED:
            continue
        bad.append(name)
    return bad


def runtime_violations(names: list[str]) -> list[str]:
    """Imports a runtime module may not make: the HTTP layer."""
    return [
        n
        for n in names
        if n == "service.api"
        or n.startswith("service.api.")
        or n.split(".")[0] in {"fastapi", "starlette"}
    ]


CORE_LAYERS = ("", "data", "diagnostics", "models", "evaluation", "selection")
"""core's layers in import order; "" is the foundation of top-level modules."""


def core_layer(module: str) -> int | None:
    """The layer of a service.core module (None outside core)."""
    if module != "service.core" and not module.startswith("service.core."):
        return None
    parts = module.split(".")
    if len(parts) > 3 and parts[2] in CORE_LAYERS:
        return CORE_LAYERS.index(parts[2])
    if len(parts) == 3 and parts[2] in CORE_LAYERS:  # "from service.core import data"
        return CORE_LAYERS.index(parts[2])
    return 0


def layer_violations(module: str, names: list[str]) -> list[str]:
    """The core modules ``module`` imports from a later layer than its own."""
    own = core_layer(module)
    if own is None:
        return []
    return [n for n in names if (core_layer(n) or 0) > own]


def files_under(part: str) -> list[Path]:
    return sorted((ROOT / part).rglob("*.py"))


def _id(path: Path) -> str:
    return str(path.relative_to(ROOT))


@pytest.mark.parametrize("path", files_under("core"), ids=_id)
def test_core_imports_only_the_standard_library_and_the_numerical_stack(path: Path) -> None:
    names = imports_of(path.read_text(encoding="utf-8"), package_of(path))
    bad = core_violations(names)
    assert not bad, f"{_id(path)} imports {bad}; core may import only stdlib, {CORE_ALLOWED}"


@pytest.mark.parametrize("path", files_under("core"), ids=_id)
def test_core_layers_import_only_their_own_layer_and_earlier_ones(path: Path) -> None:
    module = ".".join(path.relative_to(ROOT.parent).with_suffix("").parts)
    names = imports_of(path.read_text(encoding="utf-8"), package_of(path))
    bad = layer_violations(module, names)
    assert not bad, f"{_id(path)} imports {bad}, a later layer of {' -> '.join(CORE_LAYERS)}"


@pytest.mark.parametrize("path", files_under("runtime"), ids=_id)
def test_runtime_never_imports_the_api(path: Path) -> None:
    names = imports_of(path.read_text(encoding="utf-8"), package_of(path))
    bad = runtime_violations(names)
    assert not bad, f"{_id(path)} imports {bad}; runtime may not import the HTTP layer"


def test_the_walk_sees_the_packages() -> None:
    assert len(files_under("core")) > 5
    assert files_under("runtime") and files_under("api")


def test_the_checks_catch_what_they_should() -> None:
    source = (
        "import os\nimport numpy as np\nimport joblib\nfrom fastapi import FastAPI\n"
        "from ..runtime import jobs\nfrom . import series\nfrom .models.base import Forecast\n"
        "from service.api.app import create_app\n"
    )
    names = imports_of(source, "service.core")
    assert core_violations(names) == ["joblib", "fastapi", "service.runtime", "service.api.app"]
    assert runtime_violations(imports_of(source, "service.runtime")) == [
        "fastapi",
        "service.api.app",
    ]
    assert imports_of("from ... import x\n", "service.core.models") == ["service"]
    assert {CORE_LAYERS[core_layer(f"service.core.{p}.x") or 0] for p in CORE_LAYERS[1:]} == set(
        CORE_LAYERS[1:]
    )
    assert core_layer("service.core.errors") == 0 and core_layer("service.runtime.jobs") is None
    backward = ["service.core.models.base", "service.core.selection.auto", "service.core.errors"]
    assert layer_violations("service.core.data.series", backward) == backward[:2]
    assert layer_violations("service.core.selection.auto", backward) == []
    assert layer_violations("service.core.errors", ["service.core.data"]) == ["service.core.data"]
