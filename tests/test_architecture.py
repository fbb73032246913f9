"""The house: no import cycles among ``scan`` modules, no hidden imports, small modules.

The package is read with :mod:`ast` (nothing is imported).  An edge A → B means module A
imports module B (``import scan.x.y`` / ``from scan.x import y`` name the module
``scan.x.y`` when it exists, else the package ``scan.x``).  Imports of ``scan`` placed
inside functions hide the data flow and kept three import loops alive; only modules named
in :data:`LAZY_ALLOWED` may be imported lazily.
"""
from __future__ import annotations

import ast
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent / "tools"))
import module_table  # noqa: E402

from scan.store import KINDS  # noqa: E402

PACKAGE = Path(__file__).resolve().parents[1] / "scan"

#: scan modules that may be imported inside a function because they import an optional
#: dependency at their top (loaded only when the user asks for it).  None today: mpi4py is
#: imported lazily inside ``scan.pool`` itself, which is not a scan import.
LAZY_ALLOWED: set[str] = set()

#: The most top-level modules beside the stage packages (issue 18: at most 8).
MAX_TOP_MODULES = 8
MAX_MODULE_LINES = 400


def module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def modules() -> dict[str, Path]:
    return {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def resolve(name: str, known: dict[str, Path]) -> str | None:
    """The longest prefix of ``name`` that is a scan module or package."""
    parts = name.split(".")
    for n in range(len(parts), 0, -1):
        candidate = ".".join(parts[:n])
        if candidate in known:
            return candidate
    return None


def imports_of(path: Path, known: dict[str, Path]) -> tuple[set[str], list[str]]:
    """(scan modules imported at any depth, scan imports found inside functions)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    typing_only = {id(n) for block in ast.walk(tree) if _is_type_checking_block(block)
                   for n in ast.walk(block)}
    found: set[str] = set()
    hidden: list[str] = []
    for node in ast.walk(tree):
        if id(node) in typing_only:   # `if TYPE_CHECKING:` imports never run
            continue
        targets: list[str] = []
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            targets = [f"{node.module}.{a.name}" for a in node.names]
        for target in targets:
            mod = resolve(target, known) if target.startswith("scan") else None
            if mod is not None:
                found.add(mod)
        if targets and _inside_function(tree, node):
            hidden += [t for t in targets if t.startswith("scan")
                       and resolve(t, known) not in LAZY_ALLOWED]
    return found, hidden


def _is_type_checking_block(node: ast.AST) -> bool:
    return isinstance(node, ast.If) and isinstance(node.test, ast.Name) \
        and node.test.id == "TYPE_CHECKING"


def _inside_function(tree: ast.AST, target: ast.AST) -> bool:
    for fn in ast.walk(tree):
        if isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef)):
            if any(child is target for child in ast.walk(fn)):
                return True
    return False


def graph() -> tuple[dict[str, set[str]], dict[str, list[str]]]:
    known = modules()
    edges, hidden = {}, {}
    for name, path in known.items():
        found, inner = imports_of(path, known)
        edges[name] = found - {name}
        if inner:
            hidden[name] = inner
    return edges, hidden


def cycles(edges: dict[str, set[str]]) -> list[list[str]]:
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
        for w in edges.get(v, ()):
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

    for v in sorted(edges):
        if v not in index:
            visit(v)
    return out


def test_no_import_cycle_among_scan_modules():
    edges, _ = graph()
    assert cycles(edges) == []


def test_no_scan_import_inside_a_function():
    _, hidden = graph()
    assert hidden == {}


def test_top_level_holds_few_modules_beside_the_stage_packages():
    top = [p.name for p in PACKAGE.glob("*.py")]
    assert len(top) <= MAX_TOP_MODULES, sorted(top)


def test_no_module_over_the_size_limit():
    long = {name: n for name, path in modules().items()
            if (n := len(path.read_text(encoding="utf-8").splitlines())) > MAX_MODULE_LINES}
    assert long == {}


def test_the_contributor_guide_module_table_matches_the_tree():
    """DEVELOPERS.md's module table is generated (``python tests/tools/module_table.py
    --write``); this fails when a module was added, moved or re-described since."""
    guide = (PACKAGE.parent / "DEVELOPERS.md").read_text(encoding="utf-8")
    assert module_table.table() in guide


def test_the_cycle_finder_finds_a_planted_loop():
    """The checker itself: a → b → c → a is one cycle, d → a is not part of it."""
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


#: The one reader/writer module of each file kind (scan.store.kinds.KINDS names them),
#: the shared HDF5 helpers, and the spectrum table ``observe`` reads (issue 18 item 4).
FILE_MODULES: set[str] = {"scan.store.hdf5", "scan.store.kinds", "scan.store.stored_config",
                          "scan.grid.store", "scan.sampler.runfile", "scan.surrogate.store",
                          "scan.surrogate.surrogate_file", "scan.verify.partial",
                          "scan.verify.report_file", "scan.pipeline.result_file",
                          "scan.pipeline.spectrum_file", "scan.evidence.file",
                          # the Python API's readers of solve and observe results as
                          # astropy Quantities (read only; the writers are in result_file)
                          "scan.api.calls", "scan.api.records",
                          # not a file kind: it reads h5py's exception context to name the
                          # damaged file in an error message, and opens nothing
                          "scan.cli.failure"}


def test_hdf5_files_are_opened_only_by_their_file_kind_modules():
    users = set()
    for name, path in modules().items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Import) and any(a.name == "h5py" for a in node.names):
                users.add(name)
            elif isinstance(node, ast.ImportFrom) and node.module == "h5py":
                users.add(name)
    assert users <= FILE_MODULES, sorted(users - FILE_MODULES)
    # every kind's named module is one of them
    assert {kind.module for kind in KINDS} <= FILE_MODULES
