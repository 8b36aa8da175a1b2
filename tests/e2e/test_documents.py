"""The documents kept true by tests: README's tour names every sub-command and option of the CLI,
sim_instruments/README.md lists every command the simulator understands (and nothing it does not),
and README's runnable code blocks run as written against the simulated bench.

The sources of truth are the program's own tables: the argparse parser ``bringup.cli`` builds and
the SCPI command trees of the running simulated instruments.
"""

from __future__ import annotations

import argparse
import os
import re
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from bringup.cli import build_parser

ROOT = Path(__file__).resolve().parents[2]
README = ROOT / "README.md"
SIM_README = ROOT / "sim_instruments" / "README.md"


# --- README's tour and the CLI -------------------------------------------------------------------


def _commands(
    parser: argparse.ArgumentParser, path: tuple[str, ...] = ()
) -> list[tuple[tuple[str, ...], list[str]]]:
    """Every sub-command path with its long options (``--help`` left out)."""
    found = []
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                options = [
                    next((o for o in a.option_strings if o.startswith("--")), a.option_strings[0])
                    for a in sub._actions
                    if a.option_strings and "--help" not in a.option_strings
                ]
                found.append(((*path, name), options))
                found += _commands(sub, (*path, name))
    return found


def _tour() -> str:
    text = README.read_text(encoding="utf-8")
    start = text.index("## A tour of the commands")
    end = text.find("\n## ", start + 1)
    return text[start : end if end != -1 else len(text)]


def _bullets(tour: str) -> dict[str, str]:
    """``- `bringup CMD ...`: text`` items of the tour's option list (continuation lines joined),
    keyed by the command in the leading code span."""
    items: dict[str, str] = {}
    current = None
    for line in tour.splitlines():
        head = re.match(r"^- `bringup ([^`]*)`", line)
        if head:
            words = [w for w in head.group(1).split() if re.fullmatch(r"[a-z][a-z-]*", w)]
            current = " ".join(words)
            items[current] = items.get(current, "") + " " + line
        elif current is not None and line.startswith("  ") and line.strip():
            items[current] += " " + line.strip()
        else:
            current = None
    return items


def test_the_tour_names_every_sub_command_and_option() -> None:
    tour = _tour()
    bullets = _bullets(tour)
    missing = []
    for path, options in _commands(build_parser()):
        name = " ".join(path)
        if f"`bringup {name}" not in tour and not any(
            f"`bringup {' '.join(path[:-1])} " in tour and path[-1] in row
            for row in tour.splitlines()
            if row.startswith("| `bringup")
        ):
            missing.append(f"command `bringup {name}` is not in the tour")
        has_leaves = any(
            p[: len(path)] == path and len(p) > len(path) for p, _ in _commands(build_parser())
        )
        if has_leaves and not options:
            continue  # a group such as `analyze`: its leaves carry the options
        item = bullets.get(name)
        if item is None:
            missing.append(f"`bringup {name}` has no item in the tour's option list")
            continue
        for option in options:
            if not re.search(re.escape(option) + r"(?![\w-])", item):
                missing.append(f"`bringup {name} {option}` is not in its tour item")
    assert "--version" in bullets.get("", "") or "`bringup --version`" in tour
    assert not missing, "\n".join(missing)


# --- the simulator's command table ---------------------------------------------------------------


def _documented_headers(text: str) -> list[str]:
    """The program headers in the first cell of every table row, e.g. ``INPut<n>[:STATe]``.

    ``...:TRIPped?`` after ``[SOURce:]CURRent:PROTection[:LEVel]`` in one cell continues that
    header (its trailing optional node dropped): ``[SOURce:]CURRent:PROTection:TRIPped``."""
    headers = []
    for line in text.splitlines():
        if not line.startswith("| `"):
            continue
        first = re.split(r"(?<!\\)\|", line)[1]
        base = ""
        for span in re.findall(r"`([^`]+)`", first):
            head = span.split()[0].rstrip("?")
            if head.startswith("...") and base:
                head = re.sub(r"\[[^\]]*\]$", "", base) + head[3:]
            elif head:
                base = head
            if head and head != "?":
                headers.append(head)
    return headers


def _tokens(header: str) -> list[str]:
    """A documented header spelled out in full: optional nodes kept, ``<n>`` as 1."""
    spelled = header.replace("[...]", "").replace("[", "").replace("]", "").replace("<n>", "1")
    return [t for t in spelled.split(":") if t]


def _instruments_of_every_dialect(design: dict[str, float]) -> list[tuple[str, object]]:
    """(label, instrument) for every instrument of every dialect ``bringup sim --dialect`` offers:
    bench i speaks the i-th dialect of each kind (the last one again where a kind has fewer)."""
    from sim_instruments.bench import DIALECTS, start_bench

    found = []
    for i in range(max(len(names) for names in DIALECTS.values())):
        chosen = {kind: list(names)[min(i, len(names) - 1)] for kind, names in DIALECTS.items()}
        bench = start_bench(design, dialects=chosen)
        try:
            found += [(f"{kind}={chosen[kind]}", getattr(bench, kind)) for kind in DIALECTS]
        finally:
            bench.stop()
    return found


def test_the_simulator_readme_lists_every_command_and_no_other(demo_design) -> None:
    instruments = _instruments_of_every_dialect(demo_design)
    headers = _documented_headers(SIM_README.read_text(encoding="utf-8"))
    assert len(headers) > 40  # the parse found the tables
    named: set[tuple[str, str]] = set()
    stale = []
    for header in headers:
        hits = [
            (label, hit[0].pattern)
            for label, inst in instruments
            if (hit := inst.tree.lookup(_tokens(header))) is not None
        ]
        if not hits:
            stale.append(header)
        named.update(hits)
    undocumented = sorted(
        {
            f"{label}: {entry.pattern}"
            for label, inst in instruments
            for entry in inst.tree.entries
            if (label, entry.pattern) not in named
        }
    )
    assert not undocumented, "in the simulator but not in its README:\n" + "\n".join(undocumented)
    assert not stale, "in the README but not understood by the simulator:\n" + "\n".join(stale)


# --- README's code blocks ------------------------------------------------------------------------


def _fenced_blocks(text: str) -> list[tuple[str, str]]:
    return re.findall(r"^```([^\n]*)\n(.*?)^```$", text, flags=re.S | re.M)


def test_every_readme_code_block_is_fenced_and_marked() -> None:
    """``sh`` blocks are run by the next test; ``console`` ones (installing, opening the
    notebook) are not. An indented block would escape both, so there is none."""
    text = README.read_text(encoding="utf-8")
    blocks = _fenced_blocks(text)
    assert {info for info, _ in blocks} <= {"sh", "console"}
    assert any(info == "sh" for info, _ in blocks)
    outside = re.sub(r"^```.*?^```$", "", text, flags=re.S | re.M)
    indented = re.findall(r"\n\n(    \S[^\n]*)", outside)
    assert indented == [], f"indented code blocks are not run: {indented}"


def test_readme_rehearsal_runs_as_written(tmp_path: Path) -> None:
    """Each ``sh`` block runs in a fresh folder under ``bash -e`` with ``bringup`` being this
    interpreter's package, against the simulated bench on 127.0.0.1."""
    shim = tmp_path / "bin" / "bringup"
    shim.parent.mkdir()
    shim.write_text(f'#!/bin/sh\nexec "{sys.executable}" -m bringup "$@"\n')
    shim.chmod(shim.stat().st_mode | stat.S_IXUSR)
    env = {**os.environ, "PATH": f"{shim.parent}{os.pathsep}{os.environ.get('PATH', '')}"}
    env.pop("BRINGUP_PROFILES", None)
    blocks = [
        body for info, body in _fenced_blocks(README.read_text(encoding="utf-8")) if info == "sh"
    ]
    for n, body in enumerate(blocks):
        work = tmp_path / f"block{n}"
        work.mkdir()
        done = subprocess.run(
            ["bash", "-e", "-c", body], cwd=work, env=env, capture_output=True, text=True,
            timeout=120,
        )  # fmt: skip
        assert done.returncode == 0, f"README block {n} failed:\n{body}\n{done.stdout}{done.stderr}"
    # The rehearsal goes run -> sign operator -> sign reviewer -> export html, pdf, json ->
    # verify the JSON (with the log) and the PDF (on its own: it carries the signed record).
    rehearsal = next(b for b in blocks if "bringup verify" in b)
    order = [line.split()[1] for line in rehearsal.splitlines() if line.startswith("bringup ")]
    assert order == ["run", "keygen", "sign", "keygen", "sign", "export", "export", "export",
                     "verify", "verify"]  # fmt: skip
    work = tmp_path / f"block{blocks.index(rehearsal)}"
    for name in ("record.html", "record.pdf", "record.json"):
        assert (work / name).stat().st_size > 1000, name
    assert (work / "record.pdf").read_bytes().startswith(b"%PDF-")


@pytest.mark.parametrize("readme", [README, SIM_README])
def test_documents_name_only_files_that_exist(readme: Path) -> None:
    """Paths written in backticks (``checklists/demo-board.toml``) exist in the tree."""
    text = readme.read_text(encoding="utf-8")
    paths = {
        p
        for p in re.findall(r"`([\w./-]+\.(?:toml|md|py))`", text)
        if "/" in p and not p.startswith(("./", "~"))
    }
    missing = [
        p for p in sorted(paths) if not (ROOT / p).exists() and not (readme.parent / p).exists()
    ]
    assert not missing, missing
