"""Time a whole healthy headless run on the simulated bench, in-process and through the CLI.

Prints the wall time of each step of an unpaced run (what ``bringup run --sim --auto`` does:
the bench's dwells and soak intervals pass on the simulator's clock only), the same run paced
as the notebook paces it (1000 simulated seconds per wall second) against its floor (the soak's
minimum duration and the dwells at that pace), and the command line against the in-process
run (interpreter start-up and imports). The ratio to the libraries' own start-up, with its
target, is ``bench_startup.py``'s. Usage: python benchmarks/bench_headless_run.py
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from pathlib import Path


def _run(folder: Path, name: str, scale: float) -> tuple[float, list[tuple[str, float]]]:
    from bringup.boards.board_file import load_board
    from bringup.checklist.load import load_checklist
    from bringup.runner import BenchSource, SessionRunner
    from bringup.runner.headless import run_headless

    marks: list[tuple[str, float]] = []
    start = time.perf_counter()
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0001", operator="bench",
                                  db_path=folder / f"{name}.sqlite",
                                  bench=BenchSource.simulated("healthy", time_scale=scale))  # fmt: skip
    with runner:
        verdict = run_headless(
            runner, on_result=lambda r: marks.append((r.step_id, time.perf_counter()))
        )
    assert verdict == "pass", verdict
    steps, previous = [], start
    for step_id, moment in marks:
        steps.append((step_id, moment - previous))
        previous = moment
    return time.perf_counter() - start, steps


def main() -> None:
    from bringup.checklist.load import load_checklist
    from bringup.runner.bench_source import DEFAULT_SIM_TIME_SCALE, UNPACED

    folder = Path(tempfile.mkdtemp(prefix="bench-headless-"))
    _run(folder, "warm", UNPACED)  # imports (scipy.optimize among them), page cache
    total, steps = _run(folder, "a", UNPACED)
    paced, _ = _run(folder, "p", DEFAULT_SIM_TIME_SCALE)
    floor = 0.0
    for step in load_checklist().steps():
        if step.supply is not None:
            floor += step.supply.dwell_s * max(1, len(step.supply.ramp_v)) / DEFAULT_SIM_TIME_SCALE
        if step.soak is not None:
            floor += step.soak.min_duration_s / DEFAULT_SIM_TIME_SCALE

    cli_start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "bringup", "run", "--sim", "--serial", "DHS24-0002",
                           "--operator", "bench", "--db", str(folder / "b.sqlite"), "--auto",
                           "--json"], capture_output=True, text=True)  # fmt: skip
    cli = time.perf_counter() - cli_start
    assert done.returncode == 0, done.stderr

    print("healthy headless run on the simulated bench (standard checklist, demo board)")
    for step_id, seconds in steps:
        print(f"  {step_id:<32} {seconds:7.3f} s")
    print(f"  in-process run, unpaced (bench start, 8 steps, log)  {total:7.3f} s")
    print(
        f"  in-process run paced x{DEFAULT_SIM_TIME_SCALE:g} (the notebook)        {paced:7.3f} s"
    )
    print(f"  its floor: soak minimum + dwells at that pace        {floor:7.3f} s")
    print(f"  bringup run --sim --auto (new process)               {cli:7.3f} s")
    print(f"  ratio command line / in-process                      {cli / total:7.2f}")


if __name__ == "__main__":
    main()
