"""The package tree reads as the data flow, and imports only run down it.

core <- tables <- report <- app <- cli, with io (files in and out) beside tables, the demo
scenario beside app, and record (the archive) used by app alone. ``errors`` is the one
exception tree every layer raises from. The rule is checked by walking every module's syntax
tree, imports inside functions included, so a late import cannot slip past.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "forebrief"

#: What each part of the package may import from the rest of it (its own modules always).
ALLOWED: dict[str, set[str]] = {
    "errors": set(),
    "version": set(),
    "core": set(),
    "tables": {"errors", "core"},
    "io": {"errors", "tables"},
    "report": {"errors", "core", "tables"},
    "record": {"errors", "io"},
    "demo": {"errors", "core", "tables", "io"},
    "app": {"errors", "core", "tables", "io", "report", "record", "demo"},
    "cli": {"errors", "core", "tables", "io", "report", "app", "demo", "record", "__init__"},
    "__init__": {"errors", "app"},
}

#: The core is numbers only: numpy and scipy, never pandas, matplotlib or files.
CORE_FORBIDDEN = {"pandas", "matplotlib", "jinja2", "weasyprint", "pyarrow", "os", "pathlib"}


def _part(path: Path) -> str:
    rel = path.relative_to(PACKAGE)
    return rel.parts[0].removesuffix(".py") if len(rel.parts) > 1 else rel.stem


def _imports(path: Path) -> list[tuple[int, str]]:
    """Every absolute module name the file imports, with its line number."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    found: list[tuple[int, str]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            assert node.level == 0, f"{path}:{node.lineno}: use absolute imports"
            if node.module == "forebrief":
                found += [(node.lineno, f"forebrief.{a.name}") for a in node.names]
            elif node.module:
                found.append((node.lineno, node.module))
        elif isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names]
    return found


MODULES = sorted(PACKAGE.rglob("*.py"))


def test_every_module_belongs_to_a_known_part() -> None:
    parts = {_part(p) for p in MODULES}
    assert parts <= set(ALLOWED), f"new top-level parts need a rule: {parts - set(ALLOWED)}"
    assert {"core", "tables", "report", "record", "app", "cli"} <= parts


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_imports_run_down_the_flow(path: Path) -> None:
    part = _part(path)
    wrong = []
    for line, name in _imports(path):
        if name.split(".")[0] != "forebrief" or name == "forebrief":
            continue
        target = name.split(".")[1]
        if target in {"errors", "version"}:
            continue  # the exception tree and the version are for every layer
        if target != part and target not in ALLOWED[part]:
            wrong.append(f"line {line}: {part} imports {name}")
    assert not wrong, f"{path.relative_to(PACKAGE)}: " + "; ".join(wrong)


@pytest.mark.parametrize("path", sorted((PACKAGE / "core").rglob("*.py")), ids=lambda p: p.name)
def test_core_is_numbers_only(path: Path) -> None:
    bad = [f"line {n}: {m}" for n, m in _imports(path) if m.split(".")[0] in CORE_FORBIDDEN]
    assert not bad, f"core/{path.name} imports " + ", ".join(bad)


def test_the_rule_catches_an_upward_import(tmp_path: Path) -> None:
    """The walk itself: a core module importing the report layer is reported."""
    bad = tmp_path / "bad.py"
    bad.write_text("def f():\n    from forebrief.report.facts import BriefingFacts\n")
    assert _imports(bad) == [(2, "forebrief.report.facts")]
    assert "report" not in ALLOWED["core"]
