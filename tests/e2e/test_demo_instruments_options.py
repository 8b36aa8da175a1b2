"""Bad options and files for ``bringup demo`` and ``bringup instruments``, in a subprocess: one
line on stderr naming the option or file (and line and key), exit status 2, no traceback, and
nothing started: no notebook on the terminal, no temporary log, no connection to an instrument.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest

from sim_instruments.scenarios import SCENARIOS

ESC = "\x1b"  # any terminal control sequence (the full-screen app starts with several)


def _env(tmp_path: Path, **extra: str) -> dict[str, str]:
    """The environment for a run: temporary files under ``tmp_path``, no inherited profiles."""
    env = {k: v for k, v in os.environ.items() if k != "BRINGUP_PROFILES"}
    env["TMPDIR"] = str(tmp_path / "tmp")
    (tmp_path / "tmp").mkdir(exist_ok=True)
    env.update(extra)
    return env


def _bringup(tmp_path: Path, *args: str | Path, **env: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "bringup", *map(str, args)],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=30,
        env=_env(tmp_path, **env),
        cwd=tmp_path,
    )


def _one_line_error(result: subprocess.CompletedProcess, *names: str) -> str:
    assert result.returncode == 2, (result.returncode, result.stdout, result.stderr)
    assert ESC not in result.stdout and ESC not in result.stderr, "the app started"
    assert "Traceback" not in result.stderr, result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("bringup: error: "), lines[0]
    for name in names:
        assert name in lines[0], (name, lines[0])
    assert result.stdout == ""
    return lines[0]


@pytest.fixture
def listeners() -> Iterator[list[socket.socket]]:
    """Three listening sockets on 127.0.0.1 standing in for the bench: they see any connect."""
    socks = []
    for _ in range(3):
        s = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        s.bind(("127.0.0.1", 0))
        s.listen(4)
        s.setblocking(False)
        socks.append(s)
    yield socks
    for s in socks:
        s.close()


def _nobody_connected(socks: list[socket.socket]) -> None:
    for s in socks:
        with pytest.raises(BlockingIOError):
            conn, _ = s.accept()  # the handshake would have queued a connection here
            conn.close()


def _bench_file(path: Path, socks: list[socket.socket], supply_profile: str = "sim-supply") -> Path:
    ports = [s.getsockname()[1] for s in socks]
    path.write_text(
        f'[scope]\nresource = "TCPIP::127.0.0.1::{ports[0]}::SOCKET"\nprofile = "sim-scope"\n\n'
        '[scope.channels.1]\nnet = "vgs"\nprobe_ratio = 10\n\n'
        f'[supply]\nresource = "TCPIP::127.0.0.1::{ports[1]}::SOCKET"\n'
        f'profile = "{supply_profile}"\n\n'
        f'[thermometer]\nresource = "TCPIP::127.0.0.1::{ports[2]}::SOCKET"\n'
        'profile = "sim-thermometer"\n'
    )
    return path


def _line_of(path: Path, text: str, occurrence: int = 1) -> int:
    """The line number of the ``occurrence``-th line of ``path`` that holds ``text``."""
    found = [i for i, t in enumerate(path.read_text().splitlines(), 1) if text in t]
    return found[occurrence - 1]


# --- demo ---------------------------------------------------------------------------------------


def test_demo_unknown_scenario_is_one_line_before_the_app(tmp_path: Path) -> None:
    line = _one_line_error(_bringup(tmp_path, "demo", "--scenario", "nope"), "--scenario nope")
    assert all(name in line for name in SCENARIOS)  # the known names, from the simulator
    assert list((tmp_path / "tmp").iterdir()) == []  # no temporary log was made


@pytest.mark.parametrize(
    ("args", "names"),
    [
        (["--bench", "nosuch.toml"], ["--bench nosuch.toml", "no such file"]),
        (["--bench", "."], ["--bench .", "not a file"]),
        (["--db", "."], ["--db .", "is a directory"]),
        (["--db", "nofolder/log.db"], ["--db nofolder/log.db", "no such folder"]),
        (["--serial", "42"], ["--serial", "'42' does not match the pattern"]),
        (["--operator", " "], ["--operator", "non-empty"]),
    ],
)
def test_demo_bad_option_is_one_line_before_the_app(
    tmp_path: Path, args: list[str], names: list[str]
) -> None:
    _one_line_error(_bringup(tmp_path, "demo", *args), *names)
    assert list((tmp_path / "tmp").iterdir()) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == ["tmp"]  # no log made anywhere


def test_demo_bad_profiles_variable_is_one_line_before_the_app(tmp_path: Path) -> None:
    # the simulated bench's profiles are looked up there too
    missing = str(tmp_path / "gone")
    result = _bringup(tmp_path, "demo", BRINGUP_PROFILES=missing)
    _one_line_error(result, f"BRINGUP_PROFILES={missing}", "no such folder")
    assert list((tmp_path / "tmp").iterdir()) == []


def test_demo_scenario_with_a_bench_file_is_refused(
    tmp_path: Path, listeners: list[socket.socket]
) -> None:
    bench = _bench_file(tmp_path / "live.toml", listeners)
    _one_line_error(
        _bringup(tmp_path, "demo", "--bench", bench, "--scenario", "healthy"),
        "--scenario healthy",
        "not with --bench",
    )
    _nobody_connected(listeners)


def test_demo_bench_with_an_unknown_profile_names_file_line_and_key(
    tmp_path: Path, listeners: list[socket.socket]
) -> None:
    bench = _bench_file(tmp_path / "live.toml", listeners, "no-such-profile")
    at = _line_of(bench, "no-such-profile")
    _one_line_error(
        _bringup(tmp_path, "demo", "--bench", bench), f"{bench}:{at}: supply.profile", "no-such"
    )
    _nobody_connected(listeners)


# --- instruments --------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", ["missing", "regular file"])
def test_instruments_bad_profiles_folder_is_one_line(
    tmp_path: Path, listeners: list[socket.socket], kind: str
) -> None:
    bench = _bench_file(tmp_path / "live.toml", listeners)
    folder = tmp_path / "nosuchdir"
    if kind == "regular file":
        folder.write_text("not a folder\n")
    result = _bringup(tmp_path, "instruments", "--bench", bench, "--profiles", folder)
    line = _one_line_error(result, f"--profiles {folder}")
    assert ("no such folder" if kind == "missing" else "not a folder") in line
    _nobody_connected(listeners)


def test_instruments_bad_profiles_variable_is_one_line(
    tmp_path: Path, listeners: list[socket.socket]
) -> None:
    bench = _bench_file(tmp_path / "live.toml", listeners)
    missing = str(tmp_path / "gone")
    result = _bringup(tmp_path, "instruments", "--bench", bench, BRINGUP_PROFILES=missing)
    _one_line_error(result, f"BRINGUP_PROFILES={missing}", "no such folder")
    _nobody_connected(listeners)


def test_instruments_unknown_profile_is_a_configuration_error(
    tmp_path: Path, listeners: list[socket.socket]
) -> None:
    bench = _bench_file(tmp_path / "live.toml", listeners, "no-such-profile")
    at = _line_of(bench, "no-such-profile")
    result = _bringup(tmp_path, "instruments", "--bench", bench)
    _one_line_error(result, f"{bench}:{at}: supply.profile", "no profile 'no-such-profile'")
    _nobody_connected(listeners)  # not even the scope, whose profile is fine


def test_instruments_profile_of_the_wrong_kind_is_a_configuration_error(
    tmp_path: Path, listeners: list[socket.socket]
) -> None:
    bench = _bench_file(tmp_path / "live.toml", listeners, "sim-scope")
    at = _line_of(bench, 'profile = "sim-scope"', occurrence=2)  # the supply's
    result = _bringup(tmp_path, "instruments", "--bench", bench)
    _one_line_error(result, f"{bench}:{at}: supply.profile", "is a scope profile")
    _nobody_connected(listeners)
