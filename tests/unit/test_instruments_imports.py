"""The instrument package's modules import one another one way only: no cycle, counting the
imports made inside functions and under ``TYPE_CHECKING`` (a reader follows those too)."""

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
PACKAGE = ROOT / "bringup" / "instruments"


def _edges() -> dict[str, set[str]]:
    edges: dict[str, set[str]] = {}
    for path in sorted(PACKAGE.glob("*.py")):
        here = f"bringup.instruments.{path.stem}"
        found: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
            if isinstance(node, ast.ImportFrom) and node.module:
                if node.module == "bringup.instruments":
                    found.update(f"bringup.instruments.{a.name}" for a in node.names)
                elif node.module.startswith("bringup.instruments."):
                    found.add(node.module)
        edges[here] = found - {here}
    return edges


def _cycle(edges: dict[str, set[str]]) -> list[str] | None:
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(edges.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt) :] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(edges):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_instrument_modules_have_no_import_cycle():
    cycle = _cycle(_edges())
    assert cycle is None, " -> ".join(cycle or [])


def test_the_cycle_finder_sees_a_cycle():
    # the check above must be able to fail: a hand-made loop is found
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
