"""The numerical core stays free of the web layer (DESIGN.md §7)."""

from __future__ import annotations

import ast
from pathlib import Path

THERMO = Path(__file__).resolve().parents[2] / "thermo"
FORBIDDEN = {"flask", "werkzeug", "marshmallow", "requests", "gunicorn", "service"}


def imported_top_level_modules(source: str) -> set[str]:
    names = set()
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            names.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names.add(node.module.split(".")[0])
    return names


def test_thermo_never_imports_web_modules():
    sources = sorted(THERMO.rglob("*.py"))
    assert sources, "no thermo sources found"
    offenders = {
        str(path.relative_to(THERMO)): sorted(imported_top_level_modules(path.read_text(encoding="utf-8")) & FORBIDDEN)
        for path in sources
    }
    assert {k: v for k, v in offenders.items() if v} == {}


def test_import_scanner_sees_imports_inside_functions():
    source = "def f():\n    import flask.json\n    from marshmallow import fields\n"
    assert imported_top_level_modules(source) == {"flask", "marshmallow"}
