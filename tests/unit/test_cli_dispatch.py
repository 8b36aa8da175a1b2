"""The dispatcher: options before any command belong to `open` (the start screen)."""

import subprocess
import sys


def _run(*argv: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "bringup", *argv], capture_output=True, text=True, timeout=60
    )


def test_db_option_without_a_command_goes_to_the_start_screen_parser():
    # `--help` after it shows open's own help: proof the option was given to `open`
    out = _run("--db", "x.db", "--help")
    assert out.returncode == 0
    assert out.stdout.startswith("usage: bringup open")


def test_unknown_option_is_one_line_with_status_2():
    out = _run("--no-such-option")
    assert out.returncode == 2
    assert out.stderr.strip().count("\n") == 0 and "unrecognized arguments" in out.stderr
    assert "Traceback" not in out.stderr


def test_program_options_stay_the_programs():
    out = _run("--version")
    assert out.returncode == 0 and out.stdout.startswith("bringup ")
