"""Start-up of short commands, as ratios to importing the libraries they stand beside.

Each command runs in a new process, timed from the parent (wall clock), the minimum of
``--repeat`` runs on each side, alternating sides so that both see the same machine load:

* ``bringup calc bootstrap ...`` / ``python -c "import numpy"`` (target <= 0.5x): the design
  equations are plain arithmetic and must not pay for numpy.
* ``bringup run --sim --auto`` (a whole healthy headless run on the simulated bench) /
  ``python -c "import numpy, scipy.optimize, pyvisa, sqlite_utils"`` (target <= 2.5x).

Python's byte-code cache is left on (``PYTHONDONTWRITEBYTECODE`` removed from the children's
environment, one warm-up run each) as it is for an installed package.

    python benchmarks/bench_startup.py [--repeat N] [--skip-run]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CALC = ["calc", "bootstrap", "--qg", "40n", "--iq", "150u", "--ileak", "1u", "--fsw", "100k",
        "--duty-max", "0.9", "--dv", "0.5"]  # fmt: skip
RUN = ["run", "--sim", "--serial", "DHS24-0001", "--operator", "bench", "--auto", "--json"]
LIBRARIES = "import numpy, scipy.optimize, pyvisa, sqlite_utils"


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def _timed(argv: list[str], env: dict[str, str]) -> float:
    start = time.perf_counter()
    done = subprocess.run(argv, env=env, capture_output=True, text=True)
    elapsed = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(argv)}: exit {done.returncode}: {done.stderr.strip()}")
    return elapsed


def compare(name: str, command, reference: list[str], repeat: int, target: float) -> float:
    """Minimum time of ``command()`` (an argv, or a callable giving one) against ``reference``."""
    env = _env()
    argv = command if isinstance(command, list) else None
    _timed(argv or command(), env)  # warm-up: byte-code cache, page cache
    _timed(reference, env)
    best_cmd = best_ref = float("inf")
    for _ in range(repeat):
        best_cmd = min(best_cmd, _timed(argv or command(), env))
        best_ref = min(best_ref, _timed(reference, env))
    ratio = best_cmd / best_ref
    verdict = "OK" if ratio <= target else "OVER"
    print(f"{name}: {best_cmd:.3f} s / {best_ref:.3f} s = {ratio:.2f}x (target <= {target}x) "
          f"{verdict}")  # fmt: skip
    return ratio


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--skip-run", action="store_true", help="only the calc row")
    args = parser.parse_args()
    # The installed command (what a user types); ``python -m bringup`` where there is none.
    script = Path(sys.executable).with_name("bringup")
    bringup = [str(script)] if script.exists() else [sys.executable, "-m", "bringup"]
    compare("bringup calc bootstrap / import numpy", [*bringup, *CALC],
            [sys.executable, "-c", "import numpy"], max(args.repeat, 3), 0.5)  # fmt: skip
    if args.skip_run:
        return
    folder = Path(tempfile.mkdtemp(prefix="bench-startup-"))
    runs = iter(range(10**6))

    def run_argv() -> list[str]:
        return [*bringup, *RUN, "--db", str(folder / f"r{next(runs)}.sqlite")]

    compare(f"bringup run --sim --auto (healthy) / {LIBRARIES}", run_argv,
            [sys.executable, "-c", LIBRARIES], max(args.repeat, 3), 2.5)  # fmt: skip


if __name__ == "__main__":
    main()
