"""The layout's promises, read from the source with the standard library's ``ast``.

* ``workers`` (the numerical core) never imports ``sweep``, ``bench``, dask, distributed,
  h5py or yaml; inside it, a subpackage imports only the subpackages listed below it in
  :data:`WORKERS_ALLOWED` (the SDP back-ends never import the analysis layer).
* ``sweep``'s subpackages are ranked (:data:`SWEEP_RANK`): a module imports its own
  subpackage or lower ranks only (the CLI on top).
* The module import graph of both packages, imports inside functions included, has no cycle.
  Only imports under ``if TYPE_CHECKING:`` are left out: they never run.
* No module is longer than :data:`MAX_LINES` lines.

The checks are plain functions of a source tree, so the last tests feed them a small tree
with each fault and see them fail.
"""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
MAX_LINES = 400
FORBIDDEN_IN_WORKERS = ("sweep", "bench", "tests", "dask", "distributed", "dask_jobqueue",
                        "h5py", "yaml")

# the pipeline: operator -> structure -> compiled problem and back-end -> verdict; certificates
# and games stand beside the back-ends
WORKERS_ALLOWED = {
    "operators": set(),
    "structures": {"operators"},
    "sdp": {"operators", "structures"},
    "certificates": {"operators", "structures"},
    "games": {"operators"},
    "analysis": {"operators", "structures", "sdp", "certificates"},
}
SWEEP_RANK = {"errors": 0, "units": 0, "spec": 1, "planning": 2, "storage": 3, "report": 3,
              "execution": 4, "remote": 5, "cli": 6}


def module_name(root: Path, path: Path) -> str:
    parts = list(path.relative_to(root).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _is_type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def imported_names(path: Path, module: str) -> set[tuple[str, ...]]:
    """Every import in ``path``, at any depth, as absolute candidates: ``import a.b`` gives
    ``("a.b",)``, ``from a import b`` gives ``("a", "a.b")`` (``a.b`` if it is a module)."""
    tree = ast.parse(path.read_text(), str(path))
    package = module.split(".") if path.name == "__init__.py" else module.split(".")[:-1]
    found: set[tuple[str, ...]] = set()

    def visit(node: ast.AST) -> None:
        for child in ast.iter_child_nodes(node):
            if isinstance(child, ast.If) and _is_type_checking(child):
                for rest in child.orelse:
                    visit(rest)
                continue
            if isinstance(child, ast.Import):
                found.update((alias.name,) for alias in child.names)
            elif isinstance(child, ast.ImportFrom):
                if child.level:
                    base = package[: len(package) - child.level + 1]
                    target = ".".join(base + ([child.module] if child.module else []))
                else:
                    target = child.module or ""
                found.update((target, f"{target}.{alias.name}") for alias in child.names)
            visit(child)

    visit(tree)
    return found


def import_graph(root: Path, packages: tuple[str, ...]) -> tuple[dict[str, set[str]],
                                                                 dict[str, set[str]]]:
    """``(graph, external)``: project module -> project modules it imports, and -> the top
    names of everything else it imports."""
    files = {module_name(root, p): p for pkg in packages
             for p in sorted((root / pkg).rglob("*.py"))}
    graph, external = {}, {}
    for module, path in files.items():
        graph[module], external[module] = set(), set()
        for candidates in imported_names(path, module):
            target = candidates[-1] if candidates[-1] in files else candidates[0]
            if target.split(".")[0] not in packages:
                external[module].add(target.split(".")[0])
            elif target in files and target != module:
                graph[module].add(target)
    return graph, external


def layer_faults(graph: dict[str, set[str]], external: dict[str, set[str]]) -> list[str]:
    faults = []
    for module, targets in sorted(graph.items()):
        top, *rest = module.split(".")
        if top == "workers":
            bad = sorted(external[module] & set(FORBIDDEN_IN_WORKERS))
            bad += sorted(t for t in targets if not t.startswith("workers"))
            faults += [f"{module} imports {b}" for b in bad]
            own = rest[0] if rest else None
            for t in sorted(t for t in targets if t.startswith("workers.")):
                theirs = t.split(".")[1]
                if own is None or (theirs != own and theirs not in WORKERS_ALLOWED[own]):
                    faults.append(f"{module} imports {t} (a layer it may not use)")
        elif top == "sweep":
            if not rest:
                continue
            own = SWEEP_RANK[rest[0]]
            for t in sorted(t for t in targets if t.startswith("sweep.")):
                theirs = t.split(".")[1]
                if theirs != rest[0] and SWEEP_RANK[theirs] >= own:
                    faults.append(f"{module} imports {t} (not a lower layer)")
    return faults


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan)."""
    index, low, stack, on_stack, found = {}, {}, [], set(), []

    def strong(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                strong(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            strong(v)
    return found


def long_modules(root: Path, packages: tuple[str, ...]) -> list[str]:
    return [f"{p.relative_to(root)}: {n} lines" for pkg in packages
            for p in sorted((root / pkg).rglob("*.py"))
            if (n := len(p.read_text().splitlines())) > MAX_LINES]


def test_layers():
    graph, external = import_graph(ROOT, ("workers", "sweep"))
    assert len(graph) > 80
    assert layer_faults(graph, external) == []


def test_every_subpackage_has_a_layer():
    subpackages = {p.parent.name for pkg in ("workers", "sweep")
                   for p in (ROOT / pkg).glob("*/__init__.py")}
    tops = {p.stem for p in (ROOT / "sweep").glob("*.py")} - {"__init__"}
    assert subpackages - {"__pycache__"} <= set(WORKERS_ALLOWED) | set(SWEEP_RANK)
    assert tops <= set(SWEEP_RANK)
    assert not [p for p in (ROOT / "workers").glob("*.py") if p.name != "__init__.py"]


def test_no_import_cycles():
    graph, _ = import_graph(ROOT, ("workers", "sweep", "bench"))
    assert cycles(graph) == []


def test_no_long_modules():
    assert long_modules(ROOT, ("workers", "sweep", "bench")) == []


def _tree(tmp_path: Path, files: dict[str, str]) -> Path:
    for name, text in files.items():
        path = tmp_path / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    return tmp_path


def test_checks_find_faults(tmp_path):
    """Each check, given a tree with its fault, reports it (so the tests above can fail)."""
    root = _tree(tmp_path, {
        "workers/__init__.py": "",
        "workers/operators/__init__.py": "",
        "workers/operators/basis.py": "import h5py\n",
        "workers/sdp/__init__.py": "",
        "workers/sdp/conic.py": "def f():\n    from workers.analysis import robustness\n",
        "workers/analysis/__init__.py": "",
        "workers/analysis/robustness.py": "from ..sdp.conic import f\nfrom . import certified\n",
        "workers/analysis/certified.py": "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n"
                                         "    from .robustness import x\n",
        "sweep/__init__.py": "",
        "sweep/spec/__init__.py": "",
        "sweep/spec/model.py": "def g():\n    from sweep.cli import main\n",
        "sweep/cli/__init__.py": "",
        "sweep/cli/main.py": "from sweep.spec import model\n" + "x = 1\n" * MAX_LINES,
    })
    graph, external = import_graph(root, ("workers", "sweep"))
    assert graph["workers.analysis.certified"] == set()  # TYPE_CHECKING only
    assert graph["workers.analysis.robustness"] == {"workers.sdp.conic",
                                                    "workers.analysis.certified"}
    assert layer_faults(graph, external) == [
        "sweep.spec.model imports sweep.cli.main (not a lower layer)",
        "workers.operators.basis imports h5py",
        "workers.sdp.conic imports workers.analysis.robustness (a layer it may not use)",
    ]
    assert cycles(graph) == [["sweep.cli.main", "sweep.spec.model"],
                             ["workers.analysis.robustness", "workers.sdp.conic"]]
    assert long_modules(root, ("sweep",)) == [f"sweep/cli/main.py: {MAX_LINES + 1} lines"]
