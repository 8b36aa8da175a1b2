"""Reading capture files: time against ``numpy.load``, linearity, and peak memory.

Rows, each measured in this run (times: the minimum of ``--repeat`` runs, alternating sides):

* reading a 50 Mpt ``.npy`` capture (time and one channel, float64, as ``numpy.column_stack``
  writes them): ``read_capture`` + ``Capture.sampling`` + ``Capture.channel`` (what
  ``bringup analyze`` does before it measures) / ``numpy.load`` of the same file (<= 2x);
* linearity: its time per sample at 50 Mpt / at 10 Mpt (<= 1.3);
* ``bringup analyze edges`` on a 10 Mpt float32 ``.npy`` capture (time, gate; 80 MB): peak
  RSS of the command minus the interpreter baseline / the file size (<= 2x). Peak RSS is
  ``resource.getrusage(RUSAGE_SELF).ru_maxrss`` printed by the child process itself at the
  end; the baseline is the same child analysing a 2,000-sample file of the same kind (the
  same interpreter, imports and code paths, a record of negligible size). Linux carries a
  process's ru_maxrss over from its parent through fork and exec, so this row runs first,
  with the files written by another child, while this process is still small; the child's
  VmHWM (/proc/self/status, which starts afresh at exec) is printed beside it as a check.

    python benchmarks/bench_capture_read.py [--repeat N] [--keep DIR]
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_edges import build_record  # noqa: E402

from bringup.captures.files import read_capture  # noqa: E402

CHILD = """
import resource, sys
from bringup.cli import main
status = main(["analyze", "edges", sys.argv[1], "--json"])
print("MAXRSS_KB", resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)
hwm = [x for x in open("/proc/self/status") if x.startswith("VmHWM")]
print("VMHWM_KB", hwm[0].split()[1] if hwm else 0, file=sys.stderr)
sys.exit(status)
"""


def write_npy(path: Path, samples: int, dtype) -> Path:
    """A PWM gate record (noise, ringing, 8-bit steps) at 1 ns, time in the first column."""
    y, dt = build_record(samples, max(samples // 5000, 4))
    t = np.arange(samples, dtype=np.float64) * dt
    np.save(path, np.column_stack([t.astype(dtype), y.astype(dtype)]))
    return path


def read_all(path: Path) -> None:
    cap = read_capture(path)
    cap.sampling()
    cap.channel()


def best_pair(repeat: int, ours, reference) -> tuple[float, float]:
    a = b = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        ours()
        a = min(a, time.perf_counter() - start)
        start = time.perf_counter()
        reference()
        b = min(b, time.perf_counter() - start)
    return a, b


def peak_rss_kb(path: Path) -> tuple[int, int]:
    """(ru_maxrss, VmHWM) in kB of ``bringup analyze edges path`` in a new process."""
    done = subprocess.run([sys.executable, "-c", CHILD, str(path)], capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"analyze edges {path}: {done.stderr.strip()}")
    words = done.stderr.split()
    return (int(words[words.index("MAXRSS_KB") + 1]), int(words[words.index("VMHWM_KB") + 1]))


def write_in_child(path: Path, samples: int, dtype: str) -> Path:
    """``write_npy`` in another process, so that this one stays small (see the docstring)."""
    code = (f"import sys; sys.path.insert(0, {str(Path(__file__).resolve().parent)!r}); "
            f"import numpy as np; from bench_capture_read import write_npy; "
            f"write_npy(__import__('pathlib').Path({str(path)!r}), {samples}, np.{dtype})")  # fmt: skip
    subprocess.run([sys.executable, "-c", code], check=True)
    return path


def row(name: str, ratio: float, target: str, ok: bool) -> None:
    print(f"{name}: {ratio:.2f} (target {target}) {'OK' if ok else 'OVER'}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--keep", type=Path, help="write the files here (default: a temp dir)")
    args = parser.parse_args()
    repeat = max(args.repeat, 3)
    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench-capture-"))
    folder.mkdir(parents=True, exist_ok=True)
    try:
        f32 = write_in_child(folder / "e10.npy", 10_000_000, "float32")
        tiny = write_in_child(folder / "e0.npy", 2000, "float32")
        base = [min(x) for x in zip(*(peak_rss_kb(tiny) for _ in range(repeat)), strict=True)]
        peak = [min(x) for x in zip(*(peak_rss_kb(f32) for _ in range(repeat)), strict=True)]
        size = f32.stat().st_size
        ratio, hwm = ((p - b) * 1024 / size for p, b in zip(peak, base, strict=True))
        print(f"analyze edges, 10 Mpt float32 .npy ({size / 1e6:.0f} MB): peak RSS "
              f"{peak[0] / 1024:.0f} MB, baseline {base[0] / 1024:.0f} MB "
              f"(VmHWM: {hwm:.2f}x the file)")  # fmt: skip
        row("analyze edges peak RSS above baseline / file size", ratio, "<= 2x", ratio <= 2)

        big = write_npy(folder / "c50.npy", 50_000_000, np.float64)
        small = write_npy(folder / "c10.npy", 10_000_000, np.float64)
        ours50, load50 = best_pair(repeat, lambda: read_all(big), lambda: np.load(big))
        ours10, _ = best_pair(repeat, lambda: read_all(small), lambda: np.load(small))
        print(f"50 Mpt .npy (float64, {50e6 * 16 / 1e6:.0f} MB): read {ours50:.3f} s, "
              f"numpy.load {load50:.3f} s; 10 Mpt: read {ours10:.3f} s")  # fmt: skip
        row("read 50 Mpt / numpy.load", ours50 / load50, "<= 2x", ours50 / load50 <= 2)
        per = (ours50 / 50) / (ours10 / 10)
        row("read time per sample, 50 Mpt / 10 Mpt", per, "<= 1.3", per <= 1.3)
    finally:
        if args.keep is None:
            for p in folder.glob("*.npy"):
                p.unlink()
            folder.rmdir()


if __name__ == "__main__":
    main()
