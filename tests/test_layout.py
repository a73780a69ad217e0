"""The package layout: imports run one way, from later stages of the data flow to earlier ones.

Read from the source with :mod:`ast` (every import, including those inside functions), so a
lazy import cannot hide a cycle.
"""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "wordspot"

# The data flow, first stage first: a module may import only from stages before its own
# (and from inside its own subpackage). DEVELOPERS.md draws the same picture.
LAYERS = (
    ("errors", "util", "starters"),
    ("audio", "language", "acoustic"),
    ("corpus", "model"),
    ("training", "decoding"),
    ("stream",),
    ("evaluation",),
    ("api", "demo"),
    ("web",),
    ("cli",),
)
RANK = {name: i for i, names in enumerate(LAYERS) for name in names}


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imports(path: Path) -> set[str]:
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("wordspot"):
            found.add(node.module)
            # "from wordspot.decoding import kernels" imports a module too
            found.update(f"{node.module}.{a.name}" for a in node.names)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name.startswith("wordspot"))
    return found


@pytest.fixture(scope="module")
def graph():
    modules = {_module_name(p): p for p in PACKAGE.rglob("*.py")}
    return {m: {i for i in _imports(p) if i in modules and i != m} for m, p in modules.items()}


def _stage(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else None


def test_every_module_belongs_to_a_stage(graph):
    stages = {_stage(m) for m in graph} - {None}
    assert stages <= set(RANK), f"modules outside the layer table: {sorted(stages - set(RANK))}"


def test_imports_point_to_earlier_stages(graph):
    wrong = []
    for module, targets in graph.items():
        a = _stage(module)
        for target in targets:
            b = _stage(target)
            if a is None or b is None or a == b:
                continue  # the package root holds only the version and lazy public names
            if RANK[b] >= RANK[a]:
                wrong.append(f"{module} -> {target}")
    assert not wrong, "imports against the data flow: " + ", ".join(sorted(wrong))


def test_no_import_cycle(graph):
    # Depth-first search for a back edge (Cormen et al., Introduction to Algorithms,
    # section 22.3: a directed graph is acyclic iff a DFS finds no back edge).
    state, cycle = {}, []

    def visit(m, path):
        state[m] = "open"
        for t in sorted(graph[m]):
            if t == "wordspot":
                continue  # the root's lazy names are resolved at call time
            if state.get(t) == "open":
                cycle.append(" -> ".join(path[path.index(t):] + [t]))
            elif t not in state:
                visit(t, path + [t])
        state[m] = "done"

    for m in sorted(graph):
        if m not in state:
            visit(m, [m])
    assert not cycle, f"import cycles: {cycle}"


def test_subpackages_say_what_they_own():
    for init in PACKAGE.glob("*/__init__.py"):
        doc = ast.get_docstring(ast.parse(init.read_text(encoding="utf-8")))
        assert doc and len(doc) > 40, f"{init} needs a docstring saying what the subpackage owns"
