"""The pure core imports neither Flask nor the database layer (STYLE.md habit 1)."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SERVICE = Path(__file__).resolve().parents[1] / "service"
PURE = ["chem", "nano", "balance", "rules", "datafiles.py"]
FORBIDDEN = ("flask", "sqlalchemy", "alembic", "werkzeug", "service.store", "service.api", "service.web", "service.app")


def _pure_files():
    for name in PURE:
        path = SERVICE / name
        if path.is_file():
            yield path
        elif path.is_dir():
            yield from sorted(path.rglob("*.py"))


def _imports(path: Path):
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            yield from (alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            yield node.module


@pytest.mark.parametrize("path", list(_pure_files()), ids=lambda p: str(p.relative_to(SERVICE)))
def test_pure_module_imports(path):
    bad = [name for name in _imports(path) if name.split(".")[0] in FORBIDDEN or name.startswith(FORBIDDEN)]
    assert bad == [], f"{path.name} imports {bad}"


def test_the_scan_sees_the_core():
    files = {p.name for p in _pure_files()}
    assert {"formula.py", "units.py", "content.py", "cas.py", "substances.py", "datafiles.py"} <= files
