"""The package's layers, checked on its source: which subpackage may import which, and no circles.

The map (DEVELOPERS.md): leaves (errors, units, defaults) < stats < collect < record < store <
report < cli, with plugin on top. Only plugin/ imports pytest; report/ and cli/ never import
plugin/; stats/ imports only itself and the leaves.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "plugin" / "meanband"
LEAVES = {"errors", "units", "defaults"}
#: Each layer may import itself, the leaves and the layers listed for it.
ALLOWED = {
    "stats": set(),
    "collect": {"stats"},
    "record": {"stats", "collect"},
    "store": {"stats", "record"},
    "report": {"stats", "record", "store"},
    "cli": {"stats", "record", "store", "report"},
    "plugin": {"stats", "collect", "record", "store", "report"},
    "__main__": {"cli"},
}


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imports(path: Path) -> list[tuple[str, bool]]:
    """(imported module, inside `if TYPE_CHECKING:`) for every import in the file."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    typing_only: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            typing_only.update(id(n) for child in node.body for n in ast.walk(child))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(alias.name, id(node) in typing_only) for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            found.append((node.module, id(node) in typing_only))
            # "from meanband.stats import methods" imports the module meanband.stats.methods.
            found += [(f"{node.module}.{alias.name}", id(node) in typing_only)
                      for alias in node.names]
    return found


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _layer(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else None


def _edges(include_typing: bool) -> dict[str, set[str]]:
    graph: dict[str, set[str]] = {}
    for name, path in MODULES.items():
        graph[name] = {target for target, typing in _imports(path)
                       if target in MODULES and target != name and (include_typing or not typing)}
    return graph


def forbidden_edges() -> list[str]:
    """Every import that breaks the layer rules, as ``importer -> imported``."""
    bad = []
    for name, path in MODULES.items():
        layer = _layer(name)
        for target, _typing in _imports(path):
            if target.split(".")[0] in ("pytest", "_pytest") and layer != "plugin":
                bad.append(f"{name} -> {target} (only plugin/ imports pytest)")
            if not target.startswith("meanband.") or target not in MODULES:
                continue
            their = _layer(target)
            if layer is None or layer in LEAVES or their is None:
                if layer in LEAVES and their not in LEAVES and their is not None:
                    bad.append(f"{name} -> {target} (a leaf imports only leaves)")
                continue
            if their in LEAVES or their == layer:
                continue
            if their not in ALLOWED.get(layer, set()):
                bad.append(f"{name} -> {target} ({layer}/ may not import {their}/)")
    return bad


def circles() -> list[list[str]]:
    """Import circles among the package's modules (imports made for type checking left out)."""
    graph = _edges(include_typing=False)
    found, state, stack = [], {}, []

    def visit(node: str) -> None:
        state[node] = "open"
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == "open":
                found.append([*stack[stack.index(nxt):], nxt])
            elif nxt not in state:
                visit(nxt)
        stack.pop()
        state[node] = "done"

    for node in sorted(graph):
        if node not in state:
            visit(node)
    return found


def test_every_module_sits_in_a_known_layer() -> None:
    layers = {_layer(name) for name in MODULES} - {None}
    assert layers <= set(ALLOWED) | LEAVES, layers


def test_no_import_breaks_the_layer_rules() -> None:
    assert forbidden_edges() == []


def test_no_import_circles() -> None:
    assert circles() == []


def test_the_rule_check_catches_a_forbidden_edge(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # The check itself must fail on a bad edge: stats importing pytest and the plugin layer.
    bad = PACKAGE / "stats" / "interval.py"
    source = bad.read_text(encoding="utf-8") + "\nimport pytest\nfrom meanband.plugin import hookspecs\n"
    monkeypatch.setattr(Path, "read_text", lambda self, encoding=None: (
        source if self == bad else Path.read_bytes(self).decode(encoding or "utf-8")))
    edges = forbidden_edges()
    assert any("stats.interval -> pytest" in e for e in edges)
    assert any("stats.interval -> meanband.plugin.hookspecs" in e for e in edges)
