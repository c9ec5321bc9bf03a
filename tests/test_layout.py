"""The package layout: domain folders in one dependency order, no import cycles.

The order is the contributor guide's (DEVELOPERS.md, "Architecture"): a folder may import
only folders listed before it. Checked from the source with ``ast`` (imports inside
functions count too), so a late import cannot hide a circle.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PKG = ROOT / "host" / "nullsteer"
FIRMWARE = ROOT / "firmware"

#: Lowest first. ``errors`` is the package root's one shared module.
LAYERS = ["errors", "station", "antenna", "protocol", "ladder", "sim", "board", "reception",
          "schedule", "report", "web", "cli"]


def _imports(path: Path, prefix: str) -> set[str]:
    """Dotted names of every ``prefix...`` module that ``path`` imports (any depth)."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module == prefix:
                found.update(prefix + "." + a.name for a in node.names)
            elif node.module.startswith(prefix + "."):
                found.add(node.module)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name.startswith(prefix + "."))
    return found


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PKG.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _host_graph() -> dict[str, set[str]]:
    modules = {_module_name(p): p for p in PKG.rglob("*.py")}
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        targets = set()
        for imp in _imports(path, "nullsteer"):
            # "from nullsteer.x import y" may name a module y or an object y of x
            targets.add(imp if imp in modules else imp.rsplit(".", 1)[0])
        graph[name] = {t for t in targets if t in modules and t != name}
    return graph


def _cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import cycle of ``graph`` as a path, or None (depth-first search)."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_package_root_holds_only_the_three_files():
    loose = sorted(p.name for p in PKG.glob("*.py"))
    assert loose == ["__init__.py", "__main__.py", "errors.py"]


def test_every_folder_says_what_it_owns():
    for folder in sorted(p for p in PKG.iterdir() if p.is_dir() and p.name != "__pycache__"):
        doc = ast.get_docstring(ast.parse((folder / "__init__.py").read_text(encoding="utf-8")))
        assert doc and len(doc) > 40, f"{folder.name}/__init__.py needs a docstring of what it owns"
        assert folder.name in LAYERS, f"{folder.name} is not placed in the layer order"


@pytest.mark.parametrize("layer", LAYERS)
def test_folders_import_only_folders_below_them(layer):
    allowed = set(LAYERS[:LAYERS.index(layer) + 1]) | {"__init__"}
    for src, targets in _host_graph().items():
        parts = src.split(".")
        if len(parts) < 2 or parts[1] != layer:
            continue
        for t in targets:
            top = t.split(".")[1] if "." in t else "__init__"
            assert top in allowed, f"{src} imports {t}, which is above {layer}"


def test_no_import_cycle_in_the_host_package():
    assert _cycle(_host_graph()) is None


def test_no_import_cycle_in_the_firmware():
    names = {p.stem for p in FIRMWARE.glob("*.py")}
    graph: dict[str, set[str]] = {}
    for p in FIRMWARE.glob("*.py"):
        deps = set()
        for node in ast.walk(ast.parse(p.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and node.module in names:
                deps.add(node.module)
            elif isinstance(node, ast.Import):
                deps.update(a.name for a in node.names if a.name in names)
        graph[p.stem] = deps - {p.stem}
    assert _cycle(graph) is None


def test_the_cycle_finder_finds_a_cycle():
    # the checks above pass vacuously if the finder never reports anything
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _cycle({"a": {"b"}, "b": set()}) is None
