"""A real session log of a small batch, made by really running simulated boards.

``build_batch_log(folder)`` runs ``bringup run --sim --auto`` in subprocesses (each its own
simulated bench on loopback ports) into one SQLite log:

- DHS24-0001, DHS24-0002: healthy (seeds 1, 2); DHS24-0001 then signed by its operator;
- DHS24-0003: weak-bootstrap (seed 3): fails the droop stage, the outlier of the batch;
- DHS24-0004: weak-bootstrap first (seed 4), then, as after a rework, healthy (seed 6) in a
  second session: a retaken serial;
- ``WEIRD_SERIAL`` (markup and quotes, allowed by a copy of the demo board file whose serial
  pattern takes any text): healthy (seed 5).

Returns ``BatchLog`` with the log's path and the copied board file.
"""

from __future__ import annotations

import os
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
DEMO_BOARD = REPO / "checklists" / "demo-board.toml"
WEIRD_SERIAL = '<i>"R&D" 7</i>'
HEALTHY = ("DHS24-0001", "DHS24-0002", "DHS24-0004", WEIRD_SERIAL)
WEAK = "DHS24-0003"


@dataclass(frozen=True)
class BatchLog:
    db: Path
    board_file: Path  # the demo board with a serial pattern that takes any text
    key: Path  # the operator's key that signed DHS24-0001


def _run(args: list[str], env: dict[str, str]) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "bringup", *args],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
    )


def _wait(procs: list[subprocess.Popen], allowed: tuple[int, ...] = (0, 1)) -> None:
    for proc in procs:
        out, err = proc.communicate(timeout=300)
        assert proc.returncode in allowed, f"{proc.args}: exit {proc.returncode}\n{err}"


def _sim(serial: str, scenario: str, seed: int, db: Path, board: Path | str = "demo") -> list:
    return ["run", "--sim", "--auto", "--board", str(board), "--scenario", scenario,
            "--seed", str(seed), "--serial", serial, "--operator", "T. Bench",
            "--db", str(db)]  # fmt: skip


def build_batch_log(folder: Path) -> BatchLog:
    """Run the batch above into ``folder/batch.db`` (about ten seconds: runs in parallel)."""
    locks = folder / "locks"
    locks.mkdir()
    env = {**os.environ, "PYTHONUNBUFFERED": "1", "BRINGUP_LOCK_DIR": str(locks)}
    db = folder / "batch.db"
    board = folder / "any-serial-board.toml"
    board.write_text(
        DEMO_BOARD.read_text().replace(
            'serial_pattern = "^DHS24-[0-9]{4}$"', 'serial_pattern = ".+"'
        )
    )
    assert 'serial_pattern = ".+"' in board.read_text()
    # the first session of each serial, all at once (one log, one writer per session)
    _wait([
        _run(_sim("DHS24-0001", "healthy", 1, db), env),
        _run(_sim("DHS24-0002", "healthy", 2, db), env),
        _run(_sim(WEAK, "weak-bootstrap", 3, db), env),
        _run(_sim("DHS24-0004", "weak-bootstrap", 4, db), env),
        _run(_sim(WEIRD_SERIAL, "healthy", 5, db, board), env),
    ])  # fmt: skip
    # DHS24-0004 after its rework: a new session, started after the first one
    _wait([_run(_sim("DHS24-0004", "healthy", 6, db), env)], allowed=(0,))
    key = folder / "op.key"
    _wait([_run(["keygen", "--name", "T. Bench", "--out", str(key)], env)], allowed=(0,))
    session = _session_of(db, "DHS24-0001")
    _wait(
        [_run(["sign", session, "--key", str(key), "--role", "operator", "--db", str(db)], env)],
        allowed=(0,),
    )
    return BatchLog(db, board, key)


def _session_of(db: Path, serial: str) -> str:
    from bringup.store import SessionLog

    with SessionLog.open(db, create=False, read_only=True) as log:
        return next(s.id for s in log.sessions() if s.serial == serial)
