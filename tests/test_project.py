"""The project's public surface: version, exported names, the README's quick start, the wheel."""

from __future__ import annotations

import importlib
import re
import subprocess
import sys
import zipfile
from importlib.metadata import version
from pathlib import Path

import pytest

import forebrief

ROOT = Path(__file__).resolve().parents[1]


def test_version_matches_the_package_metadata() -> None:
    assert forebrief.__version__ == version("forebrief")


@pytest.mark.parametrize(
    "module",
    [
        "forebrief",
        "forebrief.core",
        "forebrief.tables.validate",
        "forebrief.core.distributions",
        "forebrief.tables.ensemble",
        "forebrief.report.facts",
        "forebrief.record",
        "forebrief.report.render",
    ],
)
def test_every_exported_name_exists(module: str) -> None:
    mod = importlib.import_module(module)
    assert mod.__all__, module
    for name in mod.__all__:
        assert hasattr(mod, name), f"{module}.{name}"


def _readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index("## Quick start")
    end = text.index("\n## ", start + 5)
    return [b.strip() for b in re.findall(r"```\n(.*?)```", text[start:end], flags=re.S)]


def test_readme_opens_with_the_job_and_has_two_quick_start_commands() -> None:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    first = next(p for p in text.split("\n\n") if p.strip() and not p.startswith("#"))
    assert len(first) > 400
    assert "briefing" in first
    commands = _readme_commands()
    assert len(commands) == 2
    assert "forebrief demo" in commands[0]
    assert "pytest" in commands[1]


def test_ci_runs_exactly_the_readmes_test_command() -> None:
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert _readme_commands()[1] in ci
    assert "-eq 5" in ci  # pytest's "no tests collected" is a failure here


@pytest.mark.slow
def test_the_wheel_ships_the_templates(tmp_path: Path) -> None:
    # a non-editable build must carry templates/ as forebrief/templates
    # (importlib.resources finds them there)
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp_path), str(ROOT)],
        check=True,
    )
    wheel = next(tmp_path.glob("forebrief-*.whl"))
    names = set(zipfile.ZipFile(wheel).namelist())
    for template in ("briefing.html.j2", "briefing.css", "print.css", "email.html.j2", "email.css"):
        assert f"forebrief/templates/{template}" in names
    assert "forebrief/cli/__init__.py" in names


def test_templates_are_found_from_the_installed_package() -> None:
    from forebrief.report.resources import template_root

    root = template_root()
    assert (root / "briefing.html.j2").is_file()
    installed = Path(forebrief.__file__).resolve()
    if "site-packages" in installed.parts:  # a regular install: the wheel's copy is used
        assert Path(str(root)).resolve().is_relative_to(installed.parent)
