"""The shape of the code: no import circles, no private names across modules, models/ below service/.

Reads every module of ``models`` and ``service`` with :mod:`ast` (imports at any depth,
function-local ones included) and checks the module graph.  A circle here means two
modules that can only be read together; a private name imported elsewhere means a
module's inside has become someone else's contract.
"""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
PACKAGES = ("models", "service")


def _module_name(path: Path) -> str:
    parts = path.relative_to(ROOT).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _modules() -> dict[str, Path]:
    out = {}
    for pkg in PACKAGES:
        for path in (ROOT / pkg).rglob("*.py"):
            if "migrations" in path.parts:
                continue  # alembic scripts are loaded by alembic, not imported
            out[_module_name(path)] = path
    return out


def _imports(name: str, path: Path, known: dict[str, Path]) -> list[tuple[str, list[str]]]:
    """(imported module, imported names) for every import of a project module in ``path``."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out += [(a.name, []) for a in node.names if a.name.split(".")[0] in PACKAGES]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target.split(".")[0] not in PACKAGES:
                continue
            names = [a.name for a in node.names]
            submodules = [f"{target}.{n}" for n in names if f"{target}.{n}" in known]
            out += [(m, []) for m in submodules]
            out.append((target, [n for n in names if f"{target}.{n}" not in known]))
    return [(m, n) for m, n in out if m in known and m != name]


def _graph() -> dict[str, set[str]]:
    known = _modules()
    graph = {}
    for name, path in known.items():
        deps = {m for m, _ in _imports(name, path, known)}
        # a package's __init__ re-exporting its modules is not a dependency of those modules on it
        graph[name] = {d for d in deps if not name.startswith(d + ".")}
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan)."""
    index, low, stack, on, out = {}, {}, [], set(), []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
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

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_no_import_circles() -> None:
    assert _cycles(_graph()) == []


def test_no_private_names_imported_across_modules() -> None:
    known = _modules()
    offenders = [f"{name} imports {n} from {m}" for name, path in known.items()
                 for m, names in _imports(name, path, known) for n in names if n.startswith("_")]
    assert offenders == []


def test_models_never_import_service() -> None:
    graph = _graph()
    assert [m for m, deps in graph.items() if m.startswith("models") and any(d.startswith("service") for d in deps)] == []


def test_the_checker_sees_a_circle() -> None:
    # the checker itself: a made-up graph with a circle is reported
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
