"""The layout the contributor guide promises: no import circle, small modules, no dynamic import."""

import ast
from pathlib import Path

import networkx as nx

PKG = Path(__file__).resolve().parents[1] / "seqgen"
MAX_LINES = 700


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PKG.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in PKG.rglob("*.py")}


def _imports(name: str, path: Path, known: set[str]) -> set[str]:
    """Every seqgen module `name` imports, at its head or inside a function (TYPE_CHECKING blocks excluded)."""
    is_pkg = path.name == "__init__.py"
    package = name if is_pkg else name.rpartition(".")[0]
    out: set[str] = set()
    tree = ast.parse(path.read_text())
    skip: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            skip.update(id(n) for child in node.body for n in ast.walk(child))
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            # `from pkg import sub` imports the submodule; `from pkg import name` the package itself
            targets = [f"{mod}.{a.name}" if f"{mod}.{a.name}" in known else mod for a in node.names]
        else:
            continue
        for t in targets:
            while t and t not in known:
                t = t.rpartition(".")[0]
            if t and t != name:
                out.add(t)
    return out


def import_graph() -> nx.DiGraph:
    mods = _modules()
    g = nx.DiGraph()
    g.add_nodes_from(mods)
    for name, path in mods.items():
        for target in _imports(name, path, set(mods)):
            g.add_edge(name, target)
    return g


def test_no_import_cycle_counting_imports_inside_functions():
    cycles = list(nx.simple_cycles(import_graph()))
    assert not cycles, f"{len(cycles)} import cycles, e.g. {min(cycles, key=len)}"


def test_no_module_over_the_size_limit():
    big = {name: n for name, p in _modules().items() if (n := len(p.read_text().splitlines())) > MAX_LINES}
    assert not big, big


def test_no_dynamic_import_in_seqgen():
    for name, path in _modules().items():
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Call):
                called = ast.unparse(node.func)
                assert called not in ("__import__", "importlib.import_module", "import_module"), (name, called)


def test_physics_never_imports_the_rest_of_seqgen():
    g = import_graph()
    for name in g:
        if name.startswith("seqgen.physics"):
            outside = [t for t in g.successors(name) if not t.startswith("seqgen.physics")]
            assert not outside, (name, outside)


def test_findings_and_codes_are_leaves():
    g = import_graph()
    # findings may use other leaves (the text formatters), never a stage
    assert all(not list(g.successors(t)) for t in g.successors("seqgen.findings")), list(g.successors("seqgen.findings"))
    for name in g:
        if name.startswith("seqgen.codes"):
            assert all(t.startswith("seqgen.codes") for t in g.successors(name)), name
