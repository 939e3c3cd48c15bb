"""Dependencies point down only, and no module imports itself round a loop.

The layers, lowest first (../shared/DESIGN.md "Layering", DEVELOPERS.md "Layout"):

    core       chem, nano, balance, rules, datafiles, resources,  pure: no Flask, no database
               vocab (the shared vocabularies)
    shared     errors, config, schemas, permissions, estimates,   plain modules on the core
               operations (the /api/v1 prefix, @operation)
    store      store/                                              SQLAlchemy models and service functions
    app        appdata (rule packs, catalogue), auth               what every request needs
    present    present/                                            records -> what people see
    top        api/, web/, documents/, cli                         the ways in; none imports another
    root       app (create_app), console (the console script),     wires everything; only the CLI imports app
               gunicorn_conf (several worker processes)

A module may import from its own layer and the layers below, never from one above. The top
four never import each other. The pure modules of documents (assessment, manifest, render,
controls) import only the core. Imports inside functions count as much as those at the top.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SERVICE = ROOT / "service"

LAYERS = {
    "core": {"chem", "nano", "balance", "rules", "datafiles", "resources", "vocab"},
    "shared": {"errors", "config", "schemas", "permissions", "estimates", "operations"},
    "store": {"store"},
    "app": {"appdata", "auth"},
    "present": {"present"},
    "top": {"api", "web", "documents", "cli"},
    "root": {"app", "console", "gunicorn_conf"},
}
ORDER = list(LAYERS)
PURE_DOCUMENTS = {"service.documents.assessment", "service.documents.manifest", "service.documents.render",
                  "service.documents.controls"}
# Third-party packages a layer must not use (the pure core and the plain modules: no web, no database).
NO_FRAMEWORK = ("flask", "werkzeug", "sqlalchemy", "alembic")
FORBIDDEN_PACKAGES = {"core": NO_FRAMEWORK, "shared": NO_FRAMEWORK}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(SERVICE.rglob("*.py")) if "migrations" not in p.parts}


MODULES = _modules()


def _resolve(module: str, node: ast.ImportFrom) -> str:
    """The absolute module an ``ImportFrom`` names (relative imports resolved against ``module``)."""
    if node.level == 0:
        return node.module or ""
    package = module.split(".")
    if not MODULES[module].name == "__init__.py":
        package = package[:-1]
    base = package[: len(package) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def imports_of(module: str) -> set[str]:
    """Every module ``module`` imports, anywhere in its body (``from a import b`` counts a.b if it is a module)."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(MODULES[module].read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            target = _resolve(module, node)
            found.add(target)
            found.update(f"{target}.{alias.name}" for alias in node.names if f"{target}.{alias.name}" in MODULES)
    return found


def layer_of(module: str) -> str | None:
    """The layer of a ``service`` module, by its first name under ``service``."""
    parts = module.split(".")
    if len(parts) < 2:
        return None
    return next((layer for layer, names in LAYERS.items() if parts[1] in names), None)


def _component(module: str) -> str:
    return module.split(".")[1]


def _violations(module: str) -> list[str]:
    own = layer_of(module)
    rank = ORDER.index(own)
    bad = []
    for target in sorted(imports_of(module)):
        if target.split(".")[0] in FORBIDDEN_PACKAGES.get(own, ()):
            bad.append(f"{target} (no web framework or database in the {own} layer)")
            continue
        if not target.startswith("service.") or target not in MODULES and not any(
                m.startswith(target + ".") for m in MODULES):
            continue
        theirs = layer_of(target)
        if theirs is None:
            bad.append(f"{target} (not in any layer)")
        elif target == "service.app" and module == "service.cli":
            continue  # the command line starts the application (and hands the starter to wired-in commands)
        elif ORDER.index(theirs) > rank:
            bad.append(f"{target} (up: {own} -> {theirs})")
        elif own == "top" and theirs == "top" and _component(target) != _component(module):
            bad.append(f"{target} (sideways: {_component(module)} -> {_component(target)})")
        elif module in PURE_DOCUMENTS and theirs != "core" and target not in PURE_DOCUMENTS:
            bad.append(f"{target} (a pure document module imports only the core)")
    return bad


def test_every_module_has_a_layer():
    unplaced = [m for m in MODULES if m != "service" and layer_of(m) is None]
    assert unplaced == [], f"add these to LAYERS in tests/test_layering.py and DEVELOPERS.md: {unplaced}"


@pytest.mark.parametrize("module", [m for m in MODULES if layer_of(m)])
def test_imports_point_down(module):
    assert _violations(module) == []


def _graph() -> dict[str, set[str]]:
    """module -> the service modules it imports; importing ``a.b.c`` runs ``a`` and ``a.b`` first, so counts them."""
    graph = {}
    for module in MODULES:
        targets = set()
        for target in imports_of(module):
            parts = target.split(".")
            targets.update(".".join(parts[:i]) for i in range(1, len(parts) + 1))
        graph[module] = {t for t in targets if t in MODULES and t != module}
    return graph


def strongly_connected(graph: dict[str, set[str]]) -> list[list[str]]:
    """Tarjan's algorithm, iterative: the components with more than one module (or a self-loop).

    >>> strongly_connected({"a": {"b"}, "b": {"a"}, "c": {"a"}})
    [['a', 'b']]
    >>> strongly_connected({"a": {"b"}, "b": set()})
    []
    """
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found = []
    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = len(index)
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph.get(child, ())))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                members = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    members.append(member)
                    if member == node:
                        break
                if len(members) > 1 or node in graph.get(node, ()):
                    found.append(sorted(members))
    return sorted(found)


def test_no_import_cycle():
    # A package importing its own submodules in __init__ (to re-export them) is the one
    # loop Python allows by design: the edge submodule -> its own package is left out.
    graph = {m: {t for t in targets if not m.startswith(t + ".")} for m, targets in _graph().items()}
    assert strongly_connected(graph) == []


def test_the_scan_sees_every_layer():
    # The scan must see the modules it is about; an empty walk would pass everything.
    seen = {layer_of(m) for m in MODULES}
    assert set(ORDER) <= seen
    assert {"service.chem.formula", "service.rules.measures", "service.store.waste", "service.present.waste",
            "service.api.waste", "service.web.waste", "service.documents.sources", "service.documents.routes",
            "service.documents.commands", "service.cli", "service.console", "service.operations"} <= set(MODULES)


def test_the_scan_catches_an_upward_import(monkeypatch, tmp_path):
    # A known violation is reported (the check itself can fail).
    fake = tmp_path / "service" / "chem" / "bad.py"
    fake.parent.mkdir(parents=True)
    fake.write_text("def f():\n    from service.api import bp\n    import flask\n", encoding="utf-8")
    monkeypatch.setitem(MODULES, "service.chem.bad", fake)
    bad = _violations("service.chem.bad")
    assert any(b.startswith("service.api ") for b in bad) and any(b.startswith("flask") for b in bad)


@pytest.mark.parametrize("module, source, expected", [
    # the top four never import each other, at the top or inside a function
    ("service.api.bad", "from service import documents\n", "service.documents (sideways: api -> documents)"),
    ("service.api.bad", "def f():\n    from service.documents.routes import bp\n",
     "service.documents.routes (sideways: api -> documents)"),
    ("service.documents.bad", "from service.api.openapi import build_document\n",
     "service.api.openapi (sideways: documents -> api)"),
    ("service.documents.bad", "import service.cli\n", "service.cli (sideways: documents -> cli)"),
    ("service.cli", "from service.documents.commands import print_group\n",
     "service.documents.commands (sideways: cli -> documents)"),
    ("service.web.bad", "from service.documents import assessment_for\n", "service.documents (sideways: web -> documents)"),
    # only the root wires them; the documents (a way in) do not start the application themselves
    ("service.documents.bad", "from service.app import create_app\n", "service.app (up: top -> root)"),
    ("service.documents.bad", "from service import console\n", "service.console (up: top -> root)"),
    # the presentation layer is below the documents
    ("service.present.bad", "from service.documents.sources import manifest_for\n",
     "service.documents.sources (up: present -> top)"),
])
def test_the_scan_catches_a_sideways_or_upward_import(monkeypatch, tmp_path, module, source, expected):
    fake = tmp_path.joinpath(*module.split(".")).with_suffix(".py")
    fake.parent.mkdir(parents=True, exist_ok=True)
    fake.write_text(source, encoding="utf-8")
    monkeypatch.setitem(MODULES, module, fake)
    assert expected in _violations(module)


def test_a_pure_document_module_imports_only_the_core(monkeypatch, tmp_path):
    fake = tmp_path / "service" / "documents" / "manifest.py"
    fake.parent.mkdir(parents=True)
    fake.write_text("from service.present.waste import dump_container\nfrom service.chem import formula\n",
                    encoding="utf-8")
    monkeypatch.setitem(MODULES, "service.documents.manifest", fake)
    assert _violations("service.documents.manifest") == [
        "service.present.waste (a pure document module imports only the core)"]
