"""The dependency rules of DEVELOPERS.md, checked on the source (one-way layers)."""

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

# what the readers of the user's files (boards, captures, the TOML reader) never import
_FILE_READERS = {
    "textual",
    "pyvisa",
    "sqlite3",
    "bringup.tui",
    "bringup.runner",
    "bringup.store",
    "bringup.record",
    "bringup.instruments",
    "bringup.checklist",
}

# package -> top-level modules it must never import
FORBIDDEN = {
    "bringup/analysis": {
        "textual",
        "pyvisa",
        "pyvisa_py",
        "sqlite_utils",
        "sqlite3",
        "socket",
        "bringup.instruments",
        "bringup.store",
        "bringup.runner",
        "bringup.tui",
        "bringup.record",
        "bringup.checklist",
        "sim_instruments",
    },
    "bringup/instruments": {
        "textual",
        "bringup.tui",
        "bringup.runner",
        "bringup.store",
        "bringup.record",
    },
    # files the user writes, read below every package that uses them
    "bringup/boards": _FILE_READERS | {"bringup.captures"},
    "bringup/captures": _FILE_READERS | {"bringup.boards"},
    # the shared ground floor: the error family and the TOML reader every user file goes through
    "bringup/errors.py": {"textual", "pyvisa", "numpy", "bringup."},
    "bringup/literal_text.py": {"textual", "pyvisa", "rich", "numpy", "bringup."},
    "bringup/tomlfile.py": _FILE_READERS
    | {"numpy", "bringup.boards", "bringup.captures", "bringup.analysis"},  # fmt: skip
    "bringup/store": {"textual", "pyvisa", "bringup.tui", "bringup.runner", "bringup.instruments"},
    "bringup/checklist": {"textual", "pyvisa", "bringup.tui", "bringup.runner"},
    "bringup/runner": {"textual", "bringup.tui", "bringup.record"},
    "bringup/record": {"textual", "pyvisa", "bringup.tui", "bringup.runner", "bringup.instruments"},
    # the batch reads through a reader's public methods: no SQL, no UI, no bench
    "bringup/batch": {
        "textual",
        "pyvisa",
        "sqlite3",
        "sqlite_utils",
        "bringup.tui",
        "bringup.runner",
        "bringup.instruments",
        "bringup.store.reading",
        "bringup.store.log",
    },
    # the lab database: the log's rows to and from PostgreSQL, nothing of the bench or the UI
    "bringup/lab": {
        "textual",
        "pyvisa",
        "bringup.tui",
        "bringup.runner",
        "bringup.instruments",
        "bringup.record",
    },
    "sim_instruments": {
        "textual",
        "pyvisa",
        "bringup.tui",
        "bringup.runner",
        "bringup.store",
        "bringup.instruments",
        "bringup.record",
    },
}


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(), filename=str(path))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
    return names


@pytest.mark.parametrize("package", sorted(FORBIDDEN))
def test_package_respects_its_layer(package):
    offenders = []
    where = ROOT / package
    paths = [where] if where.is_file() else sorted(where.rglob("*.py"))
    assert paths, f"{package} holds no Python file: the rule would check nothing"
    for path in paths:
        for name in _imports(path):
            for bad in FORBIDDEN[package]:
                if name == bad or name.startswith(bad if bad.endswith(".") else bad + "."):
                    offenders.append(f"{path.relative_to(ROOT)} imports {name}")
    assert not offenders, "\n".join(offenders)


def test_only_the_lab_package_imports_the_postgresql_driver():
    """psycopg lives in bringup/lab only: a bench without the lab (or its network) never loads
    it, and the SQL of the lab's tables is in one place."""
    lab = ROOT / "bringup" / "lab"
    files = [
        p for top in ("bringup", "sim_instruments") for p in sorted((ROOT / top).rglob("*.py"))
    ]
    assert any(p.is_relative_to(lab) for p in files), "no bringup/lab: the rule checks nothing"
    offenders = [
        f"{path.relative_to(ROOT)} imports {name}"
        for path in files
        if not path.is_relative_to(lab)
        for name in _imports(path)
        if name.split(".")[0] in ("psycopg", "psycopg2", "psycopg_binary")
    ]
    assert not offenders, "\n".join(offenders)


def _sim_module_imports(path: Path) -> set[str]:
    """The sim_instruments modules ``path`` imports anywhere (top level, inside functions or
    under ``TYPE_CHECKING``): a cycle through any of them is a cycle a reader has to untangle."""
    tree = ast.parse(path.read_text(), filename=str(path))
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module.startswith("sim_instruments."):
                found.add(node.module.split(".")[1])
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("sim_instruments."):
                    found.add(alias.name.split(".")[1])
    return found


def test_sim_instruments_import_graph_has_no_cycle():
    # the SCPI engine (scpi.py) sits on the ground floor: the fault injector builds on it
    graph = {
        path.stem: _sim_module_imports(path) - {path.stem}
        for path in sorted((ROOT / "sim_instruments").glob("*.py"))
    }
    state: dict[str, int] = {}
    cycles: list[str] = []

    def visit(node: str, trail: list[str]) -> None:
        state[node] = 1
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                cycles.append(" -> ".join([*trail[trail.index(nxt) :], nxt]))
            elif nxt not in state:
                visit(nxt, [*trail, nxt])
        state[node] = 2

    for module in sorted(graph):
        if module not in state:
            visit(module, [module])
    assert not cycles, "import cycles in sim_instruments: " + "; ".join(cycles)
    assert graph["scpi"] == set(), f"scpi.py imports {sorted(graph['scpi'])}"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _import_graph() -> dict[str, set[str]]:
    """Module -> the modules of this tree it imports (anywhere in the file, lazy imports
    too: a cycle through a function-level import is still a cycle a reader must untangle)."""
    files = [
        p for top in ("bringup", "sim_instruments") for p in sorted((ROOT / top).rglob("*.py"))
    ]
    modules = {_module_name(p): p for p in files}
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        targets: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
            if isinstance(node, ast.Import):
                wanted = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                base = node.module or ""
                if node.level:
                    anchor = package.split(".")[: len(package.split(".")) - (node.level - 1)]
                    base = ".".join([*anchor, *([base] if base else [])])
                # "from pkg import mod" imports the module pkg.mod; "from mod import name" mod
                wanted = [f"{base}.{a.name}" if f"{base}.{a.name}" in modules else base
                          for a in node.names]  # fmt: skip
            else:
                continue
            for target in wanted:
                while target and target not in modules:
                    target = target.rpartition(".")[0]
                if target and target != name:
                    targets.add(target)
        graph[name] = targets
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan, 1972)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
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
            visit(v)
    return found


def test_the_cycle_finder_sees_a_cycle():
    # a -> b -> c -> a is one cycle; d -> a hangs off it and is not part of it
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert _cycles(graph) == [["a", "b", "c"]]


def test_no_import_cycle_in_the_package_tree():
    """No modules of bringup/ or sim_instruments/ import each other in a loop, package faces
    (``__init__.py``) included: each module can be read and tested on its own."""
    cycles = _cycles(_import_graph())
    assert not cycles, "\n".join(" <-> ".join(c) for c in cycles)
