"""The import graph of the package has no cycles (DEVELOPERS.md: data flows one way; each stage
imports only the stages before it). Every import counts, deferred ones inside functions included."""

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "seepfe"


def _modules():
    out = {}
    for p in ROOT.rglob("*.py"):
        rel = p.relative_to(ROOT.parent).with_suffix("")
        parts = list(rel.parts)
        is_pkg = parts[-1] == "__init__"
        if is_pkg:
            parts = parts[:-1]
        out[".".join(parts)] = (p, is_pkg)
    return out


def import_graph() -> dict[str, set[str]]:
    """module -> the seepfe modules it imports (anywhere in its body), resolved to modules (a name
    imported from a package that is a module counts as that module)."""
    mods = _modules()
    graph = {}
    for name, (path, is_pkg) in mods.items():
        pkg = name if is_pkg else name.rsplit(".", 1)[0]
        edges = set()
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = pkg.split(".")
                    base = base[:len(base) - (node.level - 1)]
                    mod = ".".join(base + ([node.module] if node.module else []))
                else:
                    mod = node.module or ""
                subs = [f"{mod}.{a.name}" for a in node.names if f"{mod}.{a.name}" in mods]
                # 'from pkg import module' imports the module; 'from mod import name' imports mod
                targets = subs if len(subs) == len(node.names) else [mod] + subs
            for t in targets:
                if t in mods and t != name:
                    edges.add(t)
        graph[name] = edges
    return graph


def _cycles(graph):
    """Strongly connected components with more than one module (Tarjan)."""
    index, low, stack, on, out = {}, {}, [], set(), []
    counter = [0]

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in graph[v]:
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

    for v in graph:
        if v not in index:
            visit(v)
    return out


def test_the_graph_sees_deferred_imports():
    g = import_graph()
    # a deferred import inside a method counts (Result.exit_gradients imports the checks when called)
    assert "seepfe.checks.exit" in g["seepfe.result"]
    assert "seepfe.analysis" in g["seepfe.sweep.case"]




def test_no_import_cycles():
    # the package root re-exports the public API and is imported by nothing inside the package
    g = {k: {w for w in v if w != "seepfe"} for k, v in import_graph().items()}
    assert not any("seepfe" in v for k, v in import_graph().items() if k != "seepfe"), \
        "a module imports the package root; import from the module that defines the name"
    assert _cycles(g) == []


def test_the_cycle_finder_finds_a_cycle():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


def test_result_and_checks_stay_below_the_writers():
    g = import_graph()
    for mod in ("seepfe.result", "seepfe.checks.exit", "seepfe.checks.hand", "seepfe.checks.strata"):
        bad = {w for w in g[mod] if w.startswith(("seepfe.output", "seepfe.report", "seepfe.plot", "seepfe.remedies",
                                                   "seepfe.cli", "seepfe.sweep", "seepfe.analysis"))}
        assert not bad, (mod, bad)
