# The module graph of the tripcount package has no import cycles, and no
# stage imports a later one (source -> front end -> affine nests -> integer
# sets -> engine -> analyses -> reporters -> driver -> entry points).
#
# The graph is built from the sources (ast, nothing is imported): an edge for
# every `import` and `from ... import` of a tripcount module, at module level
# or inside a function (a deferred import still ties the two modules
# together), except under `if TYPE_CHECKING:` (annotations only). `from
# tripcount.x import y` is an edge to the module tripcount.x.y when that is a
# module, else to tripcount.x.
#
# KNOWN_CYCLES lists cycles that are being removed and are allowed for now;
# any other cycle fails, also one that grows a listed cycle by a module. Take
# an entry off the list once its cycle is gone, so that it cannot come back.

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "tripcount"

# Each entry: the modules of one strongly connected component.
KNOWN_CYCLES: list[frozenset[str]] = []


# Rank of each stage (the first part of the module name below tripcount); a
# module may import modules of its own rank or lower. Rank 0 holds what every
# stage may use.
STAGES: list[set[str]] = [
    {"", "ir", "diagnostics", "ctable", "paths", "options", "config", "sources", "formula", "names", "machine"},
    {"frontend"},
    {"affine"},
    {"model"},
    {"budget"},
    {"engine", "guard"},
    {"analysis"},
    {"report"},
    {"pipeline", "compdb", "cache", "cachekeys", "cacheentry"},
    {"cached"},
    {"gate", "cli", "measure", "lsp", "lspframes", "lspworker", "__main__"},
]


def rank(module: str) -> int:
    stage = module.split(".")[1] if "." in module else ""
    for k, names in enumerate(STAGES):
        if stage in names:
            return k
    raise AssertionError(f"{module}: add its stage to STAGES in tests/test_imports.py")


def module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def modules() -> dict[str, Path]:
    return {module_name(p): p for p in PACKAGE.rglob("*.py")}


def _type_checking_only(node: ast.If) -> bool:
    t = node.test
    return (isinstance(t, ast.Name) and t.id == "TYPE_CHECKING") or (
        isinstance(t, ast.Attribute) and t.attr == "TYPE_CHECKING")


def imports_of(name: str, path: Path, known: set[str], annotations: bool = False) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skip: set[int] = set()
    for node in ast.walk(tree):
        if not annotations and isinstance(node, ast.If) and _type_checking_only(node):
            skip.update(id(n) for stmt in node.body for n in ast.walk(stmt))
    is_pkg = path.name == "__init__.py"
    out: set[str] = set()
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = name.split(".") if is_pkg else name.split(".")[:-1]
                anchor = anchor[: len(anchor) - (node.level - 1)]
                base = ".".join(anchor + ([base] if base else []))
            targets = [f"{base}.{a.name}" if f"{base}.{a.name}" in known else base for a in node.names]
        else:
            continue
        for t in targets:
            while t and t not in known:  # `import tripcount.x.y` names the module; drop attributes
                t = t.rpartition(".")[0]
            if t and t != name and t.startswith("tripcount"):
                out.add(t)
    return out


def graph(annotations: bool = False) -> dict[str, set[str]]:
    """Module -> the tripcount modules it imports (with `annotations`, also those under TYPE_CHECKING)."""
    mods = modules()
    known = set(mods)
    return {m: imports_of(m, p, known, annotations) for m, p in mods.items()}


def reachable(g: dict[str, set[str]], start: str) -> set[str]:
    seen = {start}
    todo = [start]
    while todo:
        for w in g.get(todo.pop(), ()):
            if w not in seen:
                seen.add(w)
                todo.append(w)
    return seen


def cycles(g: dict[str, set[str]]) -> list[frozenset[str]]:
    """Strongly connected components with more than one module (modules that reach each other)."""
    reach = {v: reachable(g, v) for v in g}
    out: list[frozenset[str]] = []
    for v in sorted(g):
        comp = frozenset(w for w in reach[v] if v in reach.get(w, ()))
        if len(comp) > 1 and comp not in out:
            out.append(comp)
    return out


def test_the_graph_is_read():
    g = graph()
    assert "tripcount.pipeline" in g and "tripcount.model" in g["tripcount.pipeline"]
    assert "tripcount.affine" in g["tripcount.model"]


def test_cycle_finder_finds_a_cycle():
    g = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert cycles(g) == [frozenset({"a", "b", "c"})]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_no_new_import_cycles():
    found = cycles(graph())
    new = [sorted(c) for c in found if not any(c <= k for k in KNOWN_CYCLES)]
    assert not new, f"import cycles: {new}"


def test_no_cycles_through_annotations_either():
    # an import kept for annotations only still ties two modules together for a reader;
    # a lower module declares a Protocol of what it needs instead (affine/walkctx.Builder)
    found = cycles(graph(annotations=True))
    assert not found, f"import cycles through TYPE_CHECKING imports: {[sorted(c) for c in found]}"


def test_no_stage_imports_a_later_one():
    g = graph()
    back = sorted(f"{a} -> {b}" for a, bs in g.items() for b in bs if rank(b) > rank(a))
    assert not back, f"imports of a later stage: {back}"


def test_the_diagnostics_catalogue_stays_light():
    # reporters (SARIF from cached results) and the cache load the whole catalogue: its
    # modules may use only the IR's spans and each other, never a stage that loads the engine
    g = graph()
    catalogue = {m for m in g if m == "tripcount.diagnostics" or m.startswith("tripcount.diagnostics.")}
    assert {"tripcount.diagnostics.base", "tripcount.diagnostics.source", "tripcount.diagnostics.internal"} <= catalogue
    outside = sorted(f"{a} -> {b}" for a in catalogue for b in g[a] if b not in catalogue | {"tripcount.ir"})
    assert not outside, outside


def test_stage_check_can_fail():
    assert rank("tripcount.report.text") > rank("tripcount.analysis.counts") > rank("tripcount.ir")
    # the --verify checkers are analyses: they read results, never reporters or the driver
    for name in ("verify_enum", "verify_memory", "verify_threads"):
        assert rank(f"tripcount.analysis.{name}") == rank("tripcount.analysis.footprint") < rank("tripcount.pipeline")
