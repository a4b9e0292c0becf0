"""The package has no import cycle: the module graph is built from the source files with ``ast``
(every ``import`` and ``from ... import`` of a readchan module, at module level or inside a
function), and the module-level edges must form no cycle.  Function-level imports are listed but
may close a loop: they run when called, after every module is loaded."""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "readchan"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _resolve(name: str, known: set[str]) -> str | None:
    """The readchan module ``name`` refers to (``a.b.c`` may be a module or a name in ``a.b``)."""
    while name and name not in known:
        name = name.rpartition(".")[0]
    return name or None


def _inside(tree: ast.AST, test) -> set[int]:
    """ids of the nodes below every node for which ``test`` holds."""
    return {id(n) for node in ast.walk(tree) if test(node) for n in ast.walk(node) if n is not node}


def _imports(module: str, path: Path, known: set[str]) -> list[tuple[str, bool]]:
    """(imported module, at module level?) for every readchan import in ``path``; imports under
    ``if TYPE_CHECKING:`` never run and are left out."""
    tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    in_function = _inside(tree, lambda n: isinstance(n, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda)))
    never = _inside(tree, lambda n: isinstance(n, ast.If) and isinstance(n.test, ast.Name)
                    and n.test.id == "TYPE_CHECKING")
    out = []
    for node in ast.walk(tree):
        if id(node) in never:
            continue
        names: list[str] = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                parts = package.split(".")
                base = ".".join(parts[: len(parts) - node.level + 1] + ([node.module] if node.module else []))
            names = [f"{base}.{a.name}" for a in node.names]
        for name in names:
            target = _resolve(name, known)
            if target and target != module:
                out.append((target, id(node) not in in_function))
    return out


def import_graph() -> dict[str, dict[str, bool]]:
    """module → {imported module: True if imported at module level}."""
    mods = _modules()
    known = set(mods)
    graph: dict[str, dict[str, bool]] = {m: {} for m in mods}
    for m, p in mods.items():
        for target, at_top in _imports(m, p, known):
            graph[m][target] = graph[m].get(target, False) or at_top
    return graph


def find_cycle(edges: dict[str, set[str]]) -> list[str] | None:
    """One cycle of the directed graph (a list of modules, the first repeated at the end), or None."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(n: str) -> list[str] | None:
        state[n] = 1
        stack.append(n)
        for m in sorted(edges.get(n, ())):
            if state.get(m) == 1:
                return stack[stack.index(m):] + [m]
            if m not in state and (found := visit(m)):
                return found
        stack.pop()
        state[n] = 2
        return None

    for n in sorted(edges):
        if n not in state and (found := visit(n)):
            return found
    return None


def _module_level(graph: dict[str, dict[str, bool]]) -> dict[str, set[str]]:
    """Module-level edges; a package's import of its own submodule and a submodule's import of its
    package's ``__init__`` are both real edges."""
    return {m: {t for t, top in deps.items() if top} for m, deps in graph.items()}


def test_module_level_imports_form_no_cycle():
    cycle = find_cycle(_module_level(import_graph()))
    assert cycle is None, "import cycle: " + " -> ".join(cycle)


def test_graph_lists_function_level_imports_too():
    graph = import_graph()
    assert graph["readchan"]["readchan.io.capture"] is False        # load() imports it when called
    assert graph["readchan.channel"]["readchan.io.capture"] is True


def test_cycle_finder_sees_a_loop_and_passes_a_tree():
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert find_cycle({"a": {"b", "c"}, "b": {"c"}, "c": set()}) is None
