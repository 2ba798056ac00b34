"""The package layout shows the pipeline, and imports flow one way (no circle).

Every import between symgain's own modules is collected from the source with ``ast``,
including imports inside functions (a lazy import still couples two modules), and the
graph is checked for cycles.
"""
from __future__ import annotations

import ast
from pathlib import Path

import symgain

PACKAGE = Path(symgain.__file__).parent
STAGES = ("model", "design", "analysis", "emit", "cli")


def _module_name(path: Path) -> str:
    parts = ["symgain", *path.relative_to(PACKAGE).with_suffix("").parts]
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _known_modules() -> set[str]:
    return {_module_name(p) for p in PACKAGE.rglob("*.py")}


def import_graph() -> dict[str, set[str]]:
    """Edges module -> symgain module it imports (absolute and relative, any depth)."""
    known = _known_modules()
    graph: dict[str, set[str]] = {}
    for path in PACKAGE.rglob("*.py"):
        name = _module_name(path)
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        edges = graph.setdefault(name, set())
        for node in ast.walk(ast.parse(path.read_text(), str(path))):
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")[: len(package.split(".")) - node.level + 1]
                    target = ".".join([*base, node.module] if node.module else base)
                else:
                    target = node.module or ""
                candidates = [target] + [f"{target}.{a.name}" for a in node.names]
            elif isinstance(node, ast.Import):
                candidates = [a.name for a in node.names]
            else:
                continue
            edges.update(c for c in candidates if c in known and c != name)
    return graph


def find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One cycle of the graph as a list of modules, or None."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state and (found := visit(nxt)):
                return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state and (found := visit(node)):
            return found
    return None


def test_cycle_finder_sees_a_cycle():
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert find_cycle({"a": {"b"}, "b": set()}) is None


def test_no_import_circle():
    assert "symgain.design.single_input" in import_graph()["symgain.design.estimator"]  # the parser sees edges
    graph = {k: v for k, v in import_graph().items() if k != "symgain"}  # the top re-exports all
    assert find_cycle(graph) is None, " -> ".join(find_cycle(graph))


def test_stages_are_folders():
    for stage in STAGES:
        assert (PACKAGE / stage / "__init__.py").is_file(), stage
    flat = sorted(p.name for p in PACKAGE.glob("*.py"))
    assert len(flat) <= 6, f"modules left flat in symgain/: {flat}"


def test_model_stage_does_not_reach_downstream():
    """Loading ends in the model stage: it never imports design, analysis, emit or the CLI."""
    graph = import_graph()
    for name, edges in graph.items():
        if name.startswith("symgain.model"):
            late = [e for e in edges if e.split(".")[1] in ("design", "analysis", "emit", "cli")]
            assert not late, (name, late)
