"""The package tree follows the data flow: each folder imports only folders above it, and
the import graph of interkit's modules (module-level and deferred imports alike) has no
loops."""

from __future__ import annotations

import ast
from pathlib import Path

import interkit as ik

#: stages in data-flow order; a module may import its own stage and stages before it
STAGES = ("base", "model", "engine", "data", "run", "analysis", "plot", "share", "cli", "widgets")
BASE_MODULES = {"interkit.errors", "interkit.fileio", "interkit.units", "interkit.version"}
PACKAGE_ROOT = Path(ik.__file__).parent


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE_ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in PACKAGE_ROOT.rglob("*.py")}


def _stage(module: str) -> str:
    if module in BASE_MODULES:
        return "base"
    parts = module.split(".")
    assert len(parts) >= 2 and parts[1] in STAGES, f"{module} lies outside the stages {STAGES}"
    return parts[1]


def import_graph() -> dict[str, set[str]]:
    """Edges module -> interkit modules it imports (the facade ``interkit`` excluded)."""
    modules = _modules()
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        if name == "interkit":
            continue
        is_pkg = path.name == "__init__.py"
        package = name.split(".") if is_pkg else name.split(".")[:-1]
        edges: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text())):
            targets = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package[: len(package) - (node.level - 1)]
                    mod = ".".join(base + ([node.module] if node.module else []))
                else:
                    mod = node.module or ""
                targets = [f"{mod}.{a.name}" if f"{mod}.{a.name}" in modules else mod for a in node.names]
            for t in targets:
                while t and t not in modules:
                    t = t.rpartition(".")[0]
                if t and t != name and t.startswith("interkit"):
                    edges.add(t)
        graph[name] = edges
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
            if w == "interkit":
                continue
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def longest_chain(graph: dict[str, set[str]]) -> list[str]:
    """The longest import chain (the graph must be loop-free)."""
    memo: dict[str, list[str]] = {}

    def chain(v: str) -> list[str]:
        if v not in memo:
            best: list[str] = []
            for w in graph.get(v, ()):
                if w in graph:
                    c = chain(w)
                    if len(c) > len(best):
                        best = c
            memo[v] = [v] + best
        return memo[v]

    return max((chain(v) for v in graph), key=len)


def test_every_module_sits_in_a_stage():
    for name in _modules():
        if name != "interkit":
            assert _stage(name) in STAGES, f"{name} is outside the stages {STAGES}"


def test_stages_import_only_stages_above_them():
    graph = import_graph()
    bad = []
    for src, targets in graph.items():
        for dst in targets:
            if dst == "interkit":
                bad.append(f"{src} imports the facade 'interkit'")
            elif STAGES.index(_stage(dst)) > STAGES.index(_stage(src)):
                bad.append(f"{src} ({_stage(src)}) imports {dst} ({_stage(dst)})")
    assert not bad, "\n".join(bad)


def test_import_graph_has_no_loops():
    cycles = _cycles(import_graph())
    assert not cycles, f"import loops: {cycles}"


def test_modules_stay_small():
    # the tree's rule: split a module by concern before it reaches about 500 lines
    sizes = {name: len(path.read_text().splitlines()) for name, path in _modules().items()}
    too_big = {n: s for n, s in sizes.items() if s > 550}
    assert not too_big, f"modules above 550 lines: {too_big}"
