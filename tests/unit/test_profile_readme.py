"""bringup/profiles/README.md and the profile loader's schema stay in step: every key,
operation and word the loader knows is documented, and nothing documented is unknown."""

import re
from pathlib import Path

from bringup.instruments.profiles import KINDS, MAY, OPERATIONS, SCHEMA, WORDS, WORDS_IF

README = Path(__file__).resolve().parents[2] / "bringup" / "profiles" / "README.md"


def _section(title: str) -> list[list[str]]:
    """The rows of the first table under ``## title``, as lists of cell texts."""
    text = README.read_text(encoding="utf-8")
    body = text.split(f"## {title}\n", 1)[1].split("\n## ", 1)[0]
    rows = []
    for line in body.splitlines():
        if line.startswith("|") and not line.startswith("|---"):
            cells = re.split(r"(?<!\\)\|", line.strip()[1:-1])
            rows.append([c.strip() for c in cells])
    return rows[1:]  # the header row


def _names(cell: str) -> set[str]:
    return set(re.findall(r"`([^`]+)`", cell))


def _kinds(cell: str) -> set[str]:
    return set(KINDS) if cell == "every kind" else {k.strip() for k in cell.split(",")}


def test_every_key_documented_and_no_unknown_one():
    documented = set()
    for table, key, *_ in _section("Keys"):
        (t,) = _names(table)
        (k,) = _names(key)
        documented.add((t.strip("[]"), k))
    known = {(table, key) for table, keys in SCHEMA.items() for key in keys}
    assert documented - known == set(), "documented but unknown to the loader"
    assert known - documented == set(), "known to the loader but not documented"


def test_every_operation_documented_and_no_unknown_one():
    documented = set()
    for kinds, op, *_ in _section("Operations and their placeholders"):
        for kind in _kinds(kinds):
            documented |= {(kind, name) for name in _names(op)}
    known = {(kind, op) for kind in KINDS for op in OPERATIONS[kind]}
    assert documented - known == set(), "documented but unknown to the loader"
    assert known - documented == set(), "known to the loader but not documented"


def test_every_operations_placeholders_documented():
    for kinds, op, placeholders, *_ in _section("Operations and their placeholders"):
        (name,) = _names(op)
        cell = placeholders.replace("\\|", "|")
        written = {f.strip("[]") for t in _names(cell) for f in t.split("|")}
        for kind in _kinds(kinds):
            spec = OPERATIONS[kind][name]
            # the kind-wide placeholders (MAY) are documented once, below the table
            wanted = set(spec.fields) - (set(spec.optional) & set(MAY[kind]))
            assert written == wanted, (kind, name)
            assert cell.startswith("?") == OPERATIONS[kind][name].query, (kind, name)


def test_the_kind_wide_placeholders_are_documented():
    text = README.read_text(encoding="utf-8")
    for kind, names in MAY.items():
        for name in names:
            assert f"`{{{name}}}`" in text, (kind, name)


def test_every_word_documented_and_no_unknown_one():
    documented = set()
    for kinds, words, *_ in _section("Words"):
        for kind in _kinds(kinds):
            documented |= {(kind, w) for w in _names(words)}
    known = {(kind, w) for kind in KINDS for w in (*WORDS[kind], *WORDS_IF.get(kind, {}))}
    assert documented - known == set(), "documented but unknown to the loader"
    assert known - documented == set(), "known to the loader but not documented"
