"""The README's test command is the one CI runs, and it names every setting."""

from __future__ import annotations

from pathlib import Path

from service.config import Settings

ROOT = Path(__file__).resolve().parents[1]
MARKER = "# README test command:"


def ci_test_command() -> str:
    lines = (ROOT / ".ci" / "run").read_text(encoding="utf-8").splitlines()
    assert MARKER in [line.strip() for line in lines], f".ci/run has no line {MARKER!r}"
    after = [line.strip() for line in lines].index(MARKER) + 1
    return lines[after].strip()


def test_the_readme_shows_the_command_ci_runs() -> None:
    command = ci_test_command()
    assert "pytest" in command
    readme = (ROOT / "README.md").read_text(encoding="utf-8").splitlines()
    assert command in [line.strip() for line in readme], (
        f"README.md must show the CI test command exactly: {command}"
    )


def test_the_readme_names_every_setting() -> None:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    missing = [
        f"WINDVANE_{name.upper()}"
        for name in Settings.model_fields
        if f"WINDVANE_{name.upper()}" not in readme
    ]
    assert not missing, f"README.md does not mention {missing}"
