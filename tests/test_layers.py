"""Imports point one way: api -> runtime -> core, and core uses only the numerical stack."""

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


def files_under(part: str) -> list[Path]:
    return sorted((ROOT / part).rglob("*.py"))


def _id(path: Path) -> str:
    return str(path.relative_to(ROOT))


@pytest.mark.parametrize("path", files_under("core"), ids=_id)
def test_core_imports_only_the_standard_library_and_the_numerical_stack(path: Path) -> None:
    names = imports_of(path.read_text(encoding="utf-8"), package_of(path))
    bad = core_violations(names)
    assert not bad, f"{_id(path)} imports {bad}; core may import only stdlib, {CORE_ALLOWED}"


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
