"""Read scope and logger captures from files: CSV, NumPy ``.npy`` and ``.npz``.

* CSV: the time in seconds in the first column, one or more signal columns. ``#`` comment
  lines and blank lines anywhere; an optional header row of column names (and an optional
  units row under it); comma, semicolon or tab separated (with semicolons, a decimal comma
  "0,5" is read too). Parsed by numpy's C reader (``numpy.loadtxt``): no Python loop per row.
* ``.npy``: one array of shape (N, 2) or (N, 1 + channels): time, then the channels.
* ``.npz``: an array named ``t`` and one 1-D array per channel, named as the channel.

Every problem is an ``InputError`` naming the file and the row (the line number in a CSV
file) or the array: a missing or empty file, a non-numeric cell, a ragged row, NaN or
infinite values, a time that does not increase.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from bringup.errors import InputError

__all__ = ["Capture", "read_capture"]

_NUMBER = re.compile(
    r"^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$|^[+-]?(?:nan|inf)$", re.I
)
# Uniform sampling tolerance: each instant within this fraction of dt of the ideal grid
# (times printed with few digits are still read as a uniform record).
UNIFORM_TOLERANCE = 0.5


@dataclass(frozen=True)
class Capture:
    """A capture: ``t_s`` (s, increasing) and the channels by name (same length as ``t_s``)."""

    path: str
    t_s: np.ndarray
    channels: dict[str, np.ndarray]

    @property
    def names(self) -> list[str]:
        return list(self.channels)

    def channel(self, name: str | None = None) -> tuple[str, np.ndarray]:
        """The named channel, or the first one; InputError naming the channels if unknown."""
        if name is None:
            first = next(iter(self.channels))
            return first, self.channels[first]
        if name in self.channels:
            return name, self.channels[name]
        raise InputError(f"{self.path}: no channel {name!r} (channels: {', '.join(self.channels)})")

    def sampling(self) -> tuple[float, float]:
        """``(t0, dt)`` of a uniformly sampled capture; InputError naming the row if it is not."""
        t = self.t_s
        n = t.size
        t0 = float(t[0])
        dt = (float(t[-1]) - t0) / (n - 1)
        steps = np.diff(t)
        bad = np.flatnonzero(np.abs(steps - dt) > UNIFORM_TOLERANCE * dt)
        if bad.size:
            i = int(bad[0]) + 1
            raise InputError(
                f"{self.path}: sample {i + 1}: the time is not uniformly sampled "
                f"(step {float(steps[i - 1]):.6g} s, mean step {dt:.6g} s)"
            )
        return t0, dt


def read_capture(path: str | Path) -> Capture:
    """Read a capture file (CSV, .npy, .npz) by its extension (anything else is read as CSV)."""
    p = Path(path)
    name = str(path)
    if not p.exists():
        raise InputError(f"{name}: no such file")
    if p.is_dir():
        raise InputError(f"{name}: is a folder, not a capture file")
    if p.stat().st_size == 0:
        raise InputError(f"{name}: the file is empty")
    suffix = p.suffix.lower()
    if suffix == ".npy":
        t, channels = _read_npy(p, name)
    elif suffix == ".npz":
        t, channels = _read_npz(p, name)
    else:
        t, channels = _read_csv(p, name)
    return Capture(name, t, channels)


def _check_time(name: str, t: np.ndarray, where) -> None:
    if t.size < 2:
        raise InputError(f"{name}: needs at least 2 samples, got {t.size}")
    bad = np.flatnonzero(~(np.diff(t) > 0))
    if bad.size:
        i = int(bad[0]) + 1
        raise InputError(
            f"{name}: {where(i)}: the time does not increase ({t[i]:.9g} s after {t[i - 1]:.9g} s)"
        )


def _check_finite(name: str, data: np.ndarray, where) -> None:
    finite = np.isfinite(data)
    if not finite.all():
        i = int(np.flatnonzero(~finite.all(axis=1) if data.ndim == 2 else ~finite)[0])
        raise InputError(f"{name}: {where(i)}: NaN or infinite value")


# --- NumPy files ---------------------------------------------------------------------------


def _load_numpy(p: Path, name: str):
    try:
        return np.load(p, allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        raise InputError(f"{name}: not a readable NumPy file ({exc})") from None


def _numeric(name: str, arr: np.ndarray, what: str) -> np.ndarray:
    if arr.dtype.kind not in "fiu":
        raise InputError(f"{name}: {what} holds {arr.dtype} values, not numbers")
    return arr


def _read_npy(p: Path, name: str):
    arr = _numeric(name, _load_numpy(p, name), "the array")
    if arr.ndim != 2 or arr.shape[1] < 2:
        raise InputError(
            f"{name}: expected an array of shape (N, 2): time and signal columns, got {arr.shape}"
        )
    _check_finite(name, arr, lambda i: f"row {i + 1}")
    t = np.ascontiguousarray(arr[:, 0], dtype=np.float64)
    _check_time(name, t, lambda i: f"row {i + 1}")
    channels = {f"ch{k}": np.ascontiguousarray(arr[:, k]) for k in range(1, arr.shape[1])}
    return t, channels


def _read_npz(p: Path, name: str):
    with _load_numpy(p, name) as z:
        if not hasattr(z, "files"):
            raise InputError(f"{name}: not an .npz archive")
        if "t" not in z.files:
            raise InputError(f"{name}: no array named 't' (arrays: {', '.join(z.files) or 'none'})")
        t = np.asarray(_numeric(name, z["t"], "array 't'"), dtype=np.float64).ravel()
        channels = {}
        for key in z.files:
            if key == "t":
                continue
            arr = _numeric(name, z[key], f"array {key!r}")
            if arr.ndim != 1 or arr.size != t.size:
                raise InputError(
                    f"{name}: array {key!r} has shape {arr.shape}, expected ({t.size},) like 't'"
                )
            _check_finite(f"{name}: array {key!r}", arr, lambda i: f"sample {i + 1}")
            channels[key] = arr
    if not channels:
        raise InputError(f"{name}: no channel arrays beside 't'")
    _check_finite(f"{name}: array 't'", t, lambda i: f"sample {i + 1}")
    _check_time(name, t, lambda i: f"sample {i + 1}")
    return t, channels


# --- CSV -----------------------------------------------------------------------------------


def _split(line: str, delimiter: str | None) -> list[str]:
    parts = line.split(delimiter) if delimiter else line.split()
    return [s.strip().strip('"').strip("'").strip() for s in parts]


def _sniff(lines: list[str]) -> str | None:
    for d in (";", "\t", ","):
        if d in lines[0]:
            return d
    return None  # whitespace


def _read_csv(p: Path, name: str):
    try:
        return _read_csv_as(p, name, "utf-8-sig")
    except UnicodeDecodeError:
        return _read_csv_as(p, name, "latin-1")


def _read_csv_as(p: Path, name: str, encoding: str):
    # Look at the start of the file: comments, header (names, maybe units), first data line.
    header: list[str] | None = None
    delimiter: str | None = None
    data_line = None  # 1-based line number of the first data row
    head_lines = 0
    fields: list[str] = []
    with open(p, encoding=encoding) as f:
        for line_no, line in enumerate(f, start=1):
            line = line.strip()
            if not line or line.startswith("#"):
                continue
            if delimiter is None:
                delimiter = _sniff([line])
            fields = _split(line, delimiter)
            if all(_NUMBER.match(x) for x in fields):
                data_line = line_no
                break
            head_lines += 1
            if head_lines == 1:
                header = fields
            elif head_lines > 2:
                raise InputError(
                    f"{name}: line {line_no}: non-numeric cell {_first_bad(fields)!r} "
                    "(a CSV capture has at most a header row and a units row)"
                )
    if data_line is None:
        raise InputError(f"{name}: no data rows (only comments or a header)")

    ncols = len(fields)
    if ncols < 2:
        raise InputError(
            f"{name}: line {data_line}: need a time column and at least one signal column"
        )
    decimal_comma = delimiter == ";" and any("," in x for x in fields)
    try:
        if decimal_comma:
            with open(p, encoding=encoding) as f:
                lines = (x.replace(",", ".") for k, x in enumerate(f, 1) if k >= data_line)
                data = np.loadtxt(lines, delimiter=delimiter, comments="#", ndmin=2)
        else:
            data = np.loadtxt(
                p,
                delimiter=delimiter,
                comments="#",
                skiprows=data_line - 1,
                ndmin=2,
                dtype=np.float64,
                encoding=encoding,
                quotechar='"',
            )
    except ValueError as exc:
        raise InputError(
            _locate(name, p, encoding, data_line, delimiter, ncols, decimal_comma, exc)
        ) from None
    if data.shape[1] != ncols:
        raise InputError(f"{name}: line {data_line}: expected {ncols} columns")

    def where(i: int) -> str:
        return f"line {_line_of_row(p, encoding, data_line, i)}"

    _check_finite(name, data, where)
    t = np.ascontiguousarray(data[:, 0])
    _check_time(name, t, where)

    names = _channel_names(name, header, ncols)
    channels = {n: np.ascontiguousarray(data[:, k + 1]) for k, n in enumerate(names)}
    return t, channels


def _first_bad(fields: list[str]) -> str:
    return next((f for f in fields if not _NUMBER.match(f)), fields[0] if fields else "")


def _channel_names(name: str, header: list[str] | None, ncols: int) -> list[str]:
    if header is None:
        return [f"ch{k}" for k in range(1, ncols)]
    if len(header) != ncols:
        raise InputError(f"{name}: the header names {len(header)} columns but the data has {ncols}")
    names = []
    for k, n in enumerate(header[1:], start=1):
        n = n or f"ch{k}"
        if n in names:
            raise InputError(f"{name}: column name {n!r} appears twice in the header")
        names.append(n)
    return names


def _data_lines(p: Path, encoding: str, data_line: int):
    """(line number, stripped line) of every data row from line ``data_line`` on."""
    with open(p, encoding=encoding) as f:
        for number, line in enumerate(f, start=1):
            s = line.strip()
            if number >= data_line and s and not s.startswith("#"):
                yield number, s


def _line_of_row(p: Path, encoding: str, data_line: int, row: int) -> int:
    for k, (number, _) in enumerate(_data_lines(p, encoding, data_line)):
        if k == row:
            return number
    return data_line + row


def _locate(name, p, encoding, data_line, delimiter, ncols, decimal_comma, exc) -> str:
    """One line naming the first bad row of a CSV file that numpy refused (slow path)."""
    for number, line in _data_lines(p, encoding, data_line):
        fields = _split(line.replace(",", ".") if decimal_comma else line, delimiter)
        if len(fields) != ncols:
            return f"{name}: line {number}: {len(fields)} columns, expected {ncols}"
        for col, f in enumerate(fields, start=1):
            try:
                value = float(f)
            except ValueError:
                return f"{name}: line {number}, column {col}: not a number: {f!r}"
            if not math.isfinite(value):
                return f"{name}: line {number}, column {col}: NaN or infinite value"
    return f"{name}: cannot read the CSV data ({str(exc).splitlines()[0]})"
