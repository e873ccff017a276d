"""The package layout: modules import each other without circles, and no module grows past the size that usually
means it holds two concerns (a house rule, see shared STYLE notes: "a module past ~600 lines")."""

import ast
from pathlib import Path

import networkx as nx

PACKAGE = Path(__file__).resolve().parent.parent / "lanesolve"


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def import_graph() -> nx.DiGraph:
    """Module -> module edges for every ``lanesolve`` import, at top level or inside functions (a late import
    still makes a circle; only imports under ``if TYPE_CHECKING:`` are left out, since they never run)."""
    graph = nx.DiGraph()
    modules = {_module_name(p): p for p in PACKAGE.rglob("*.py")}
    for name, path in modules.items():
        graph.add_node(name)
        tree = ast.parse(path.read_text(encoding="utf-8"))
        skip = {id(n) for node in ast.walk(tree) if isinstance(node, ast.If)
                and getattr(node.test, "id", "") == "TYPE_CHECKING" for n in ast.walk(node)}
        for node in ast.walk(tree):
            if id(node) in skip or not isinstance(node, ast.ImportFrom | ast.Import):
                continue
            targets = []
            if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("lanesolve"):
                for alias in node.names:
                    full = f"{node.module}.{alias.name}"
                    targets.append(full if full in modules else node.module)
            elif isinstance(node, ast.Import):
                targets += [a.name for a in node.names if a.name.startswith("lanesolve")]
            for target in targets:
                if target in modules and target != name and target != "lanesolve":
                    graph.add_edge(name, target)
    return graph


def test_import_graph_has_no_circle():
    cycles = list(nx.simple_cycles(import_graph()))
    assert cycles == [], f"import circles: {cycles}"


def test_import_graph_sees_known_edges():
    # Guards the check above against silently seeing nothing: these imports exist in the code.
    graph = import_graph()
    assert graph.has_edge("lanesolve.pipeline", "lanesolve.read.reader")
    assert graph.has_edge("lanesolve.model.diagnose", "lanesolve.model.solve")


#: The house rule is "about 600 lines"; past this a module is split by concern.
MAX_MODULE_LINES = 650


def test_no_module_is_past_the_size_that_means_two_concerns():
    sizes = {str(p.relative_to(PACKAGE.parent)): len(p.read_text(encoding="utf-8").splitlines())
             for p in PACKAGE.rglob("*.py")}
    assert sizes, "no modules found"
    too_big = {name: n for name, n in sizes.items() if n > MAX_MODULE_LINES}
    assert too_big == {}
