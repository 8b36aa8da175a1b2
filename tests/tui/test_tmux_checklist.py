"""A newcomer takes the demo board through the whole healthy checklist in a real terminal,
pressing only keys the foot of the screen shows, and carries on with the command the notebook
prints when it closes.

``bringup demo`` runs as its own process in a tmux pane of 100x30 (the smallest size the
notebook is laid out for). The simulated bench is started by the test and handed over as a
bench file, so after the process has ended its supply is asked over a fresh connection whether
the output is off. Every wait polls the screen for text, with a generous timeout.
"""

from __future__ import annotations

import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest
from tmux_pane import TMUX, Pane, foot_keys

pytestmark = pytest.mark.skipif(TMUX is None, reason="tmux is not installed on this machine")

SIZE = (100, 30)
STEPS = 8  # the standard checklist's steps


def _next_key(screen: str, keys: dict[str, str]) -> str | None:
    """What a newcomer presses, from what the foot offers and the screen says (None: wait)."""
    if "x" in keys:  # a step runs: its foot offers STOP; wait for it to end
        return None
    if "y" in keys:  # a prompt: the board is ready, yes
        return "y"
    if "enter" in keys:  # a reading to type (the meter on the logic rail reads 3.3 V)
        return "enter"
    if "Session verdict" in screen:  # the summary: done, quit
        return "q"
    if "Every step now has a verdict" in screen and "m" in keys:
        return "m"
    if "r" in keys:
        return "r"
    return None


def _names_wrap_under_their_column(screen: str) -> None:
    """Each line of the checklist column starts with its padding (a marker, a state, or the
    blank under a name): a word of a long name at the column's very edge is a wrapping glitch
    (seen once when the column's scroll bar came after the names were wrapped)."""
    for line in screen.split("\n"):
        if line.startswith("▊") and "▎" in line:
            row = line[1:].split("▎")[0].rstrip("▁▂▃▄▅▆▇█ ")
            assert not row or row[0] in " ➤─▔▁", f"{row!r}\n{screen}"


def test_a_newcomer_takes_the_whole_healthy_checklist_with_the_keys_in_the_foot(
    bench_file, tmp_path, visa_rm
):
    bench, path = bench_file("healthy")
    log = tmp_path / "newcomer.sqlite"
    bringup = Path(sys.executable).with_name("bringup")
    env = {**os.environ, "TERM": "xterm-256color", "BRINGUP_OPERATOR": "newcomer",
           "TEXTUAL_ANIMATIONS": "none"}  # fmt: skip
    command = f"{bringup} demo --bench {path} --db {log}; echo bringup-exit=$?; read done"
    pane = Pane(command, env, SIZE)
    pressed: list[str] = []
    seen: list[str] = []
    try:
        screen = pane.wait_for("CHECKLIST", "r run/retake", timeout=60)
        while "bringup-exit=" not in screen:
            keys = foot_keys(screen)
            _names_wrap_under_their_column(screen)
            assert not re.search(r"Attempt \d+: ✘ FAILED", screen), screen  # a healthy board
            key = _next_key(screen, keys)
            if key is None:  # a step is running: wait until its foot changes
                screen = pane.wait_until(lambda s, k=keys: foot_keys(s) != k, "progress", 120)
                continue
            assert key in keys or key == "q" and "q" in keys, (key, keys, screen)
            assert len(pressed) < 60, pressed  # eight steps need about 25 key presses
            if key == "enter" and "leave it empty" not in screen:
                pane.keys("-l", "3.30 V")  # typed into the field, as read on the meter
            pane.keys({"enter": "Enter"}.get(key, key))
            pressed.append(key)
            seen.append(screen)
            # each key the newcomer presses changes what the foot offers (a prompt, a running
            # step, the summary): a key that did nothing would stall here and fail the test
            screen = pane.wait_until(
                lambda s, k=keys: foot_keys(s) != k or "bringup-exit=" in s, f"after {key}", 120
            )
            if key == "q":
                screen = pane.wait_for("bringup-exit=", timeout=60)
        screen = pane.screen(joined=True)
    finally:
        pane.kill()

    assert "bringup-exit=0" in screen, screen
    assert "Traceback" not in screen
    # one r per step: a second r before a step's attempt is logged means the foot offered r
    # while the step was starting (the screen it was pressed on is in the message)
    progress = [re.search(r"(\d)/8 done", seen[i]) for i, k in enumerate(pressed) if k == "r"]
    again = [seen[i] for i, k in enumerate(pressed) if k == "r"][1:]
    repeats = [s for s, a, b in zip(again, progress, progress[1:], strict=False)
               if a and b and a[1] == b[1]]  # fmt: skip
    assert pressed.count("r") == STEPS and pressed[-2:] == ["m", "q"], (
        " ".join(pressed) + "\n" + "\n".join(repeats)
    )

    # the supply ended OFF: asked over a fresh connection after the process has gone
    assert not bench.supply.output_on
    supply = visa_rm.open_resource(
        bench.resources["supply"], read_termination="\n", write_termination="\n", timeout=2000
    )
    try:
        assert supply.query("OUTPut:STATe?").strip() == "0"
    finally:
        supply.close()

    # the log holds one finished session that passed, every step passed at its first attempt
    from bringup.store import SessionLog

    with SessionLog.open(log) as opened:
        (session,) = opened.sessions()
        outcomes = [a.outcome for a in opened.attempts(session.id)]
    assert session.state == "finished" and session.verdict == "pass", session
    assert outcomes == ["pass"] * STEPS, outcomes

    # the last line names the command for the record: run as printed, it writes the PDF
    printed = re.search(r"its record: (bringup export .*)$", screen, re.MULTILINE)
    assert printed, screen
    words = shlex.split(printed[1])
    assert words[words.index("--db") + 1] == str(log), words
    done = subprocess.run([str(bringup), *words[1:]], cwd=tmp_path, capture_output=True,
                          text=True, timeout=120)  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "record.pdf").read_bytes().startswith(b"%PDF")
