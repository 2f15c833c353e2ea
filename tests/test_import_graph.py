"""The package's import graph, read statically from the source (every import, lazy ones and
those under ``TYPE_CHECKING`` included): no cycles between modules, and dependencies between
packages point one way (the data flows style -> canvas -> windows -> layers -> composite ->
sinks; the checker reads statistics; writers only write; nothing imports the CLI)."""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "compose"


def _modules() -> dict[str, Path]:
    out = {}
    for f in ROOT.rglob("*.py"):
        parts = list(f.relative_to(ROOT.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = f
    return out


def _graph() -> dict[str, set[str]]:
    mods = _modules()
    graph: dict[str, set[str]] = {m: set() for m in mods}
    for m, f in mods.items():
        package = m if f.name == "__init__.py" else m.rpartition(".")[0]
        for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")[: len(package.split(".")) - node.level + 1]
                    mod = ".".join(base + ([node.module] if node.module else []))
                else:
                    mod = node.module or ""
                targets = [f"{mod}.{a.name}" for a in node.names] + [mod]
            else:
                continue
            for t in targets:
                parts = t.split(".")
                for k in range(len(parts), 0, -1):     # the longest module the name is in
                    c = ".".join(parts[:k])
                    if c in mods:
                        # importing a package runs its __init__; a module inside a package
                        # does not depend on its own package's __init__ by being in it
                        if c != m and c != "compose" and not m.startswith(c + "."):
                            graph[m].add(c)
                        break
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def _package(module: str) -> str:
    parts = module.split(".")
    return ".".join(parts[:2])


GRAPH = _graph()

# package -> packages it must never import (directly or lazily)
FORBIDDEN = {
    "compose.color": {"compose.ramps", "compose.style", "compose.layers", "compose.sources",
                      "compose.check", "compose.engine", "compose.render", "compose.output",
                      "compose.page", "compose.api", "compose.measure", "compose.previews",
                      "compose.proof"},
    "compose.ramps": {"compose.style", "compose.layers", "compose.sources", "compose.check",
                      "compose.engine", "compose.render", "compose.api", "compose.measure",
                      "compose.previews", "compose.proof"},
    "compose.layers": {"compose.engine", "compose.render", "compose.check", "compose.output",
                       "compose.api", "compose.measure", "compose.previews", "compose.proof"},
    "compose.sources": {"compose.layers", "compose.engine", "compose.render", "compose.check",
                        "compose.output", "compose.api", "compose.measure", "compose.proof"},
    "compose.check": {"compose.layers", "compose.engine", "compose.render", "compose.output",
                      "compose.api", "compose.measure", "compose.previews", "compose.proof",
                      "compose.sources"},
    "compose.engine": {"compose.render", "compose.output", "compose.api", "compose.proof"},
    "compose.measure": {"compose.engine", "compose.render", "compose.output", "compose.api",
                        "compose.layers"},
    "compose.previews": {"compose.engine", "compose.render", "compose.output", "compose.api"},
    "compose.output": {"compose.engine", "compose.render", "compose.api", "compose.proof",
                       "compose.measure"},
    "compose.canvas": {"compose.layers", "compose.engine", "compose.render", "compose.check",
                       "compose.output", "compose.api"},
}


def test_no_import_cycles():
    assert _cycles(GRAPH) == []


def test_the_graph_is_read():
    # the reader itself: known edges are found (a reader that finds nothing passes everything)
    assert "compose.engine" in GRAPH["compose.render"]
    assert "compose.check.stats" in GRAPH["compose.measure"]
    assert "compose.color.lab" in GRAPH["compose.ramps.model"]
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


@pytest.mark.parametrize("package", sorted(FORBIDDEN))
def test_dependencies_point_one_way(package):
    bad = sorted(f"{m} -> {t}" for m, targets in GRAPH.items() if _package(m) == package
                 for t in targets if _package(t) in FORBIDDEN[package])
    assert bad == []


def test_nothing_imports_the_cli():
    # compose.__main__ (``python -m compose``) is an entry point like the console script
    bad = sorted(f"{m} -> {t}" for m, targets in GRAPH.items()
                 if _package(m) != "compose.cli" and m != "compose.__main__"
                 for t in targets if _package(t) == "compose.cli")
    assert bad == []


def test_the_checker_reads_no_style_internals():
    # the checker reads the Style model; layer kinds' schemas, the loader and the readers are
    # the style package's own business
    bad = sorted(f"{m} -> {t}" for m, targets in GRAPH.items() if _package(m) == "compose.check"
                 for t in targets if t in {"compose.style.kinds", "compose.style.load",
                                           "compose.style.validate"})
    assert bad == []
