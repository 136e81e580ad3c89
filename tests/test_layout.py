"""The package layout (DEVELOPERS.md, "Layout"): stages as subpackages, imports without cycles.

Every import statement counts, also those inside function bodies (a lazy import is still a
dependency). Imports of the top-level package (``from .. import __version__``) are left out: the
top level is the public surface that re-exports the stages.
"""

import ast
from pathlib import Path

import tracer

PACKAGE = Path(tracer.__file__).parent
STAGES = ("volumes", "optics", "scene", "_kernels", "rendering", "outputs", "dataset", "scoring", "cli", "io")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _resolve(current: str, is_package: bool, node: ast.ImportFrom) -> list[str]:
    if node.level == 0:
        base = node.module or ""
    else:
        parts = current.split(".")
        keep = len(parts) - node.level + (1 if is_package else 0)
        base = ".".join(parts[:keep] + ([node.module] if node.module else []))
    return [base] + [f"{base}.{alias.name}" for alias in node.names]


def import_graph() -> dict[str, set[str]]:
    files = {_module_name(path): path for path in PACKAGE.rglob("*.py")}
    graph = {}
    for name, path in files.items():
        edges = set()
        for node in ast.walk(ast.parse(path.read_text())):
            targets = []
            if isinstance(node, ast.ImportFrom):
                targets = _resolve(name, path.name == "__init__.py", node)
            elif isinstance(node, ast.Import):
                targets = [alias.name for alias in node.names]
            for target in targets:
                if target in files and target != "tracer" and target != name:
                    edges.add(target)
        graph[name] = edges
    return graph


def _cycle(graph):
    state = {}
    stack = []

    def visit(node):
        state[node] = "open"
        stack.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == "open":
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        state[node] = "done"
        stack.pop()
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_no_import_cycles():
    graph = import_graph()
    assert "tracer.dataset.run" in graph and "tracer.volumes.nrrd" in graph
    assert _cycle(graph) is None, " -> ".join(_cycle(graph))


def test_the_checker_finds_a_cycle():
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _cycle({"a": {"b"}, "b": set()}) is None


def test_kernels_import_no_api():
    """STYLE: kernels see arrays; they import numpy, numba and the compile policy only."""
    graph = import_graph()
    for name, edges in graph.items():
        if name.startswith("tracer._kernels"):
            assert all(edge.startswith("tracer._kernels") or edge == "tracer.config" for edge in edges), (name, edges)


def test_stages_are_documented_subpackages():
    top_level = sorted(path.stem for path in PACKAGE.glob("*.py"))
    assert top_level == ["__init__", "__main__", "config", "errors"]
    for stage in STAGES:
        init = PACKAGE / stage / "__init__.py"
        docstring = ast.get_docstring(ast.parse(init.read_text()))
        assert docstring and len(docstring) > 60, stage


def test_no_module_past_600_lines():
    long = {str(path.relative_to(PACKAGE)): n for path in PACKAGE.rglob("*.py")
            if (n := len(path.read_text().splitlines())) > 600}
    assert not long, long


def test_outside_references_import_nothing_from_tracer():
    """tests/reference/ is the outside side of every check (its __init__ says why): not one import of ``tracer``
    or of another test module that does, also inside function bodies."""
    folder = Path(__file__).parent / "reference"
    offenders = []
    for path in sorted(folder.glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                names = [("." * node.level) + (node.module or "")]
            else:
                continue
            for name in names:
                allowed_relative = name.startswith(".") and not name.startswith("..")
                if name.split(".")[0] in ("tracer", "tests") and not name.startswith("tests.reference"):
                    offenders.append(f"{path.name}: {name}")
                elif name.startswith(".") and not allowed_relative:
                    offenders.append(f"{path.name}: {name}")
    assert not offenders, offenders
    assert len(list(folder.glob("*.py"))) >= 5
