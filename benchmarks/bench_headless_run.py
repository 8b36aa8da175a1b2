"""Time a whole healthy headless run on the simulated bench, in-process and through the CLI.

Prints the wall time of each step and of the run, and two ratios measured in this same run:
the run against its floor (the waits the bench imposes: supply settling dwells and the soak's
minimum duration on the sped-up thermal clock), and the command line against the in-process
run (interpreter start-up and imports). Usage: python benchmarks/bench_headless_run.py
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from pathlib import Path


def main() -> None:
    from bringup.boards.board_file import load_board
    from bringup.checklist.load import load_checklist
    from bringup.runner import BenchSource, SessionRunner
    from bringup.runner.bench_source import DEFAULT_SIM_TIME_SCALE
    from bringup.runner.headless import run_headless

    folder = Path(tempfile.mkdtemp(prefix="bench-headless-"))
    checklist = load_checklist()
    marks: list[tuple[str, float]] = []
    start = time.perf_counter()
    runner = SessionRunner.create(board=load_board("demo"), checklist=checklist,
                                  serial="DHS24-0001", operator="bench", db_path=folder / "a.sqlite",
                                  bench=BenchSource.simulated("healthy"))  # fmt: skip
    with runner:
        verdict = run_headless(
            runner, on_result=lambda r: marks.append((r.step_id, time.perf_counter()))
        )
    total = time.perf_counter() - start
    assert verdict == "pass", verdict

    floor = 0.0
    for step in checklist.steps():
        if step.supply is not None:
            floor += step.supply.dwell_s * max(1, len(step.supply.ramp_v))
        if step.soak is not None:
            floor += step.soak.min_duration_s / DEFAULT_SIM_TIME_SCALE

    cli_start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "bringup", "run", "--sim", "--serial", "DHS24-0002",
                           "--operator", "bench", "--db", str(folder / "b.sqlite"), "--auto",
                           "--json"], capture_output=True, text=True)  # fmt: skip
    cli = time.perf_counter() - cli_start
    assert done.returncode == 0, done.stderr

    print("healthy headless run on the simulated bench (standard checklist, demo board)")
    previous = start
    for step_id, moment in marks:
        print(f"  {step_id:<32} {moment - previous:7.3f} s")
        previous = moment
    print(f"  in-process run (bench start, 8 steps, log)   {total:7.3f} s")
    print(f"  floor: settling dwells + soak minimum        {floor:7.3f} s")
    print(f"  ratio run / floor                            {total / floor:7.2f}")
    print(f"  bringup run --sim --auto (new process)       {cli:7.3f} s")
    print(f"  ratio command line / in-process              {cli / total:7.2f}")


if __name__ == "__main__":
    main()
