"""Read scope and logger captures from files: CSV, NumPy ``.npy`` and ``.npz``.

* CSV: the time in seconds in the first column, one or more signal columns. ``#`` comment
  lines and blank lines anywhere; an optional header row of column names (and an optional
  units row under it); comma, semicolon or tab separated (with semicolons, a decimal comma
  "0,5" is read too, on every row). Parsed by numpy's C reader (``numpy.loadtxt``); only a
  semicolon file or one with trailing delimiters is fed to it through a per-line generator.
* ``.npy``: one array of shape (N, 2) or (N, 1 + channels): time, then the channels.
* ``.npz``: an array named ``t`` and one 1-D array per channel, named as the channel; arrays
  named ``meta_*`` describe the record (``bringup capture`` keeps the raw codes, the scale and
  the scope's identity there) and are not channels.

A trailing delimiter on every row ("0,1.5,") is read as the end of the row, not as an empty
column. A ``.npy`` file named ``.npz`` (or the reverse) is refused by its signature, before
NumPy reads it.

Every problem is an ``InputError`` naming the file and the row (the line number in a CSV
file) or the array: a missing or empty file, a non-numeric cell (hexadecimal numbers too), a
ragged row, NaN or infinite values, overrange values, a time that does not increase.

Overrange: a sample of magnitude 9.9E37 or more is refused. SCPI-99 reserves 9.9E37 (+INF)
and 9.91E37 (NaN) for "no value", and instruments answer them when they cannot measure; no
scope or logger reading is that large, and keeping every sample below it leaves the analyses
room to square and sum a record without leaving the float range.
"""

from __future__ import annotations

import itertools
import math
import re
import tokenize
import zipfile
import zlib
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bringup.analysis.verdict import SCPI_OVERRANGE as OVERRANGE  # a sample this large: overrange
from bringup.errors import InputError

__all__ = ["Capture", "read_capture"]

_NUMBER = re.compile(
    r"^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$|^[+-]?(?:nan|inf)$", re.I
)
# A hexadecimal cell ("0x1F"): refused by name rather than taken as a header (numpy and the
# analyses read decimal numbers only).
_HEX = re.compile(r"^[+-]?0[xX][0-9a-fA-F]+$")
_NPY_MAGIC = b"\x93NUMPY"
# What numpy and zipfile raise on a damaged or foreign file, when it is opened or when an
# archive member is read (lazily): besides the usual ValueError/OSError, a damaged header
# raises tokenize's TokenError or SyntaxError, a damaged archive BadZipFile, zlib.error,
# NotImplementedError (unknown compression) or RuntimeError (encrypted member), and a header
# claiming a huge shape MemoryError.
_LOAD_ERRORS = (
    ValueError,
    OSError,
    EOFError,
    KeyError,
    SyntaxError,
    tokenize.TokenError,
    MemoryError,
    OverflowError,
    NotImplementedError,
    RuntimeError,
    zipfile.BadZipFile,
    zlib.error,
)
_ZIP_MAGIC = (b"PK\x03\x04", b"PK\x05\x06")  # a member first, or an empty archive
# Uniform sampling: each instant within this fraction of dt of the ideal grid t0 + k*dt, on
# top of the rounding the file's time column carries (``Capture.time_quantum_s``). A missing
# sample moves the instants on one side of it by at least dt/2 from the grid drawn through
# the first and last instants, so a quarter of dt refuses it wherever it is.
UNIFORM_TOLERANCE = 0.25
# A time column printed more coarsely than the sample interval (equal neighbouring instants)
# still gives the interval from its first and last instants, if its rounding is at most this
# fraction of the record's span (the interval is then known to 0.1 %).
SPAN_RESOLUTION = 1e-3
# Samples per pass over a column: checks run chunk by chunk so their temporaries stay a few MB
# (cache-sized) instead of full-size float64 copies of a deep record.
_CHUNK = 1 << 16


@dataclass(frozen=True)
class Capture:
    """A capture: ``t_s`` (s, increasing; float32 or float64 as in the file, maybe a strided
    view of its table) and the channels by name (contiguous, same length as ``t_s``)."""

    path: str
    t_s: np.ndarray
    channels: dict[str, np.ndarray]
    # Where sample i is in the file ("line 12" of a CSV, "row 3" of a .npy, "sample 3").
    locate: Callable[[int], str] = field(
        default=lambda i: f"sample {i + 1}", repr=False, compare=False
    )
    # The resolution of the time column (s): each instant is the true one rounded to this
    # (half of it either way): the printed last digit of a CSV, the float spacing of a
    # binary column at its largest instant.
    time_quantum_s: float = 0.0
    # The first sample off the uniform grid (-1: none), found while the file was read; None
    # when not looked for yet.
    off_grid: int | None = field(default=None, repr=False, compare=False)

    def where(self, i: int) -> str:
        """Where sample ``i`` (0-based) is in the file, for an error message."""
        return self.locate(i)

    @property
    def names(self) -> list[str]:
        return list(self.channels)

    def channel(self, name: str | None = None) -> tuple[str, np.ndarray]:
        """The named channel, or the first one; InputError naming the channels if unknown."""
        if name is None:
            name = next(iter(self.channels))
        elif name not in self.channels:
            raise InputError(
                f"{self.path}: no channel {name!r} (channels: {', '.join(self.channels)})"
            )
        return name, self.channels[name]

    def sampling(self) -> tuple[float, float]:
        """``(t0, dt)`` of a uniformly sampled capture; InputError naming the sample if not.

        ``dt`` is the span over the number of intervals, ``(t[-1] - t[0]) / (n - 1)``; every
        instant must lie within ``UNIFORM_TOLERANCE * dt`` of the grid ``t0 + k*dt``, plus the
        time column's own rounding (``time_quantum_s``: half of it on the instant, half on the
        grid drawn through two rounded instants) and float64 arithmetic. Checked while the
        file was read, in the same chunked pass as its other checks (no full-size
        temporaries).
        """
        t = self.t_s
        scan = _TimeScan(self.path, t, self.where, self.time_quantum_s)
        off = self.off_grid
        if off is None:
            for start in range(0, t.size, _CHUNK):
                scan.on_grid(start, start + _CHUNK)
            off = scan.off_grid
        if off >= 0:
            raise InputError(self._not_uniform(off, scan.dt, scan.tol))
        return scan.t0, scan.dt

    def _not_uniform(self, off_grid: int, dt: float, tol: float) -> str:
        """The message for a non-uniform time axis: the first step that is not a sample
        interval (a gap, a repeat), else the first instant off the grid (a drift)."""
        t = self.t_s
        step_tol = 2 * (tol - UNIFORM_TOLERANCE * dt) + 0.5 * dt
        for start in range(0, t.size - 1, _CHUNK):
            steps = np.diff(np.asarray(t[start : start + _CHUNK + 1], dtype=np.float64))
            bad = np.flatnonzero(np.abs(steps - dt) > step_tol)
            if bad.size:
                i = start + int(bad[0]) + 1
                return (
                    f"{self.path}: {self.where(i)}: the time is not uniformly sampled "
                    f"(step {float(steps[bad[0]]):.6g} s, sample interval {dt:.6g} s)"
                )
        i = off_grid
        off = float(t[i]) - (float(t[0]) + i * dt)
        return (
            f"{self.path}: {self.where(i)}: the time is not uniformly sampled "
            f"({off:.3g} s off the grid of sample interval {dt:.6g} s)"
        )


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
        t, channels, quantum, off_grid = _read_npy(p, name)
        locate = _row
    elif suffix == ".npz":
        t, channels, quantum, off_grid = _read_npz(p, name)
        locate = _sample
    else:
        t, channels, locate, quantum, off_grid = _read_csv(p, name)
    return Capture(name, t, channels, locate, quantum, off_grid)


def _row(i: int) -> str:
    return f"row {i + 1}"


def _sample(i: int) -> str:
    return f"sample {i + 1}"


def _float_quantum(t: np.ndarray) -> float:
    """The rounding step of a binary time column at its largest instant (s): float32 holds
    about 7 digits (1 ns steps at 10 ms are 0.93 ns apart in float32), integers are exact."""
    if t.dtype.kind != "f" or t.size == 0:
        return 0.0
    reach = max(abs(float(t[0])), abs(float(t[-1])))
    if not math.isfinite(reach):
        return 0.0  # refused as NaN or infinite
    return float(np.spacing(t.dtype.type(reach)))


class _TimeScan:
    """The checks of a time column, run chunk by chunk beside the other checks of a file.

    ``increasing``: every instant after the one before (equal neighbours allowed only when
    the time is printed more coarsely than the sample interval, ``quantum`` > dt, yet finely
    enough to give the interval from the span, ``SPAN_RESOLUTION``). ``on_grid``: every
    instant within ``tol`` of ``t0 + k*dt``, ``dt = (t[-1] - t[0]) / (n - 1)``; ``tol`` is
    ``UNIFORM_TOLERANCE * dt`` plus the column's rounding (half a ``quantum`` on the instant,
    half on the grid drawn through two rounded instants) plus float64 arithmetic.
    """

    def __init__(self, name: str, t: np.ndarray, where, quantum: float) -> None:
        n = t.size
        if n < 2:
            raise InputError(f"{name}: {where(0)}: needs at least 2 samples, got {n}")
        self.name, self.t, self.where = name, t, where
        self.t0, last = float(t[0]), float(t[-1])
        span = last - self.t0
        self.dt = span / (n - 1)
        self.repeats_ok = span > 0 and quantum > self.dt and quantum <= SPAN_RESOLUTION * span
        reach = max(abs(self.t0), abs(last))
        slack = 8 * float(np.spacing(reach)) if math.isfinite(reach) else 0.0
        self.tol = UNIFORM_TOLERANCE * self.dt + quantum + slack
        self.off_grid = -1
        self._kdt = np.arange(min(n, _CHUNK), dtype=np.float64) * self.dt  # k*dt, per chunk
        self._work = np.empty(min(n, _CHUNK) + 1, dtype=np.float64)  # reused, chunk by chunk

    def increasing(self, start: int, stop: int) -> None:
        """Refuse the first instant in ``[start, stop)`` that is not after the one before."""
        lo = max(start - 1, 0)
        t = self.t[lo:stop]
        steps = np.subtract(t[1:], t[:-1], out=self._work[: t.size - 1])
        least = steps.min() if steps.size else 1.0
        if least > 0 or (self.repeats_ok and least == 0):
            return
        bad = steps < 0 if self.repeats_ok else ~(steps > 0)
        i = lo + int(np.argmax(bad)) + 1
        raise InputError(
            f"{self.name}: {self.where(i)}: the time does not increase "
            f"({float(self.t[i]):.9g} s after {float(self.t[i - 1]):.9g} s)"
        )

    def on_grid(self, start: int, stop: int) -> None:
        """Note the first instant in ``[start, stop)`` off the uniform grid (once)."""
        if self.off_grid >= 0:
            return
        chunk = self.t[start:stop]
        # t_k - k*dt, against the chunk's first grid instant: one subtraction, two reductions.
        shifted = np.subtract(chunk, self._kdt[: chunk.size], out=self._work[: chunk.size])
        origin = self.t0 + start * self.dt
        if shifted.max() - origin > self.tol or origin - shifted.min() > self.tol:
            off = np.abs(shifted - origin) > self.tol
            self.off_grid = start + int(np.argmax(off))


def _check_finite(name: str, data: np.ndarray, where) -> None:
    """Refuse NaN, infinite and overrange (|x| >= 9.9E37) samples, naming the first one."""
    if data.dtype.kind in "iu":
        if data.size == 0 or (data.min() > -OVERRANGE and data.max() < OVERRANGE):
            return
    rows = max(1, _CHUNK // (data.shape[1] if data.ndim == 2 else 1))
    for start in range(0, data.shape[0], rows):
        _finite_chunk(name, data[start : start + rows], where, start)


def _finite_chunk(name: str, chunk: np.ndarray, where, start: int) -> None:
    """``_check_finite`` of the rows of a file from ``start`` on: a minimum and a maximum
    (NaN propagates through both), the element-wise search only where they fail."""
    if chunk.size == 0 or (chunk.min() > -OVERRANGE and chunk.max() < OVERRANGE):
        return
    # One comparison catches all three: NaN compares False, inf and overrange are not below.
    ok = (chunk < OVERRANGE) & (chunk > -OVERRANGE)
    if ok.all():
        return
    j = int(np.flatnonzero(~ok.all(axis=1) if chunk.ndim == 2 else ~ok)[0])
    column = ""
    if chunk.ndim == 2:
        k = int(np.flatnonzero(~ok[j])[0])
        value, column = float(chunk[j, k]), f", column {k + 1}"
    else:
        value = float(chunk[j])
    if not math.isfinite(value):
        raise InputError(f"{name}: {where(start + j)}: NaN or infinite value")
    raise InputError(
        f"{name}: {where(start + j)}{column}: overrange value {value:.6g} "
        "(|value| >= 9.9E37, the SCPI no-value number)"
    )


def _scan_table(name: str, arr: np.ndarray, where, names: list[str], quantum: float = 0.0):
    """Check a table (time, then one column per channel) in one chunked pass, cache-sized
    chunks: finite values, increasing time, the uniform grid; and copy each channel out
    contiguous on the way. Returns the time (a view), the channels, the time's resolution and
    the first sample off the grid (-1: none)."""
    n = arr.shape[0]
    t = _time_column(arr[:, 0])
    quantum = max(quantum, _float_quantum(t))
    scan = _TimeScan(name, t, where, quantum)
    outs = [np.empty(n, dtype=arr.dtype) for _ in names]
    rows = max(1, _CHUNK // arr.shape[1])
    for start in range(0, n, rows):
        stop = start + rows
        block = arr[start:stop]
        _finite_chunk(name, block, where, start)
        scan.increasing(start, stop)
        scan.on_grid(start, stop)
        for k, out in enumerate(outs, start=1):
            out[start:stop] = block[:, k]
    return t, dict(zip(names, outs, strict=True)), quantum, scan.off_grid


def _time_column(t: np.ndarray) -> np.ndarray:
    """The time as read: float32 and float64 kept (and not copied), other numbers as float64."""
    return t if t.dtype in (np.float32, np.float64) else t.astype(np.float64)


# --- NumPy files ---------------------------------------------------------------------------


def _signature(p: Path) -> bytes:
    with open(p, "rb") as f:
        return f.read(6)


def _load_npy(p: Path, name: str) -> np.ndarray:
    """The one array of a ``.npy`` file; InputError for anything else."""
    head = _signature(p)
    if head.startswith(_ZIP_MAGIC):
        raise InputError(
            f"{name}: is an .npz archive (several arrays), not a .npy file: rename it to .npz"
        )
    if head != _NPY_MAGIC:
        raise InputError(
            f"{name}: not a readable NumPy file (it does not start with the .npy signature)"
        )
    try:
        return np.load(p, allow_pickle=False)
    except _LOAD_ERRORS as exc:
        raise InputError(f"{name}: not a readable NumPy file ({_why(exc)})") from None


def _why(exc: BaseException) -> str:
    """The first line of an exception's message, "object arrays" said plainly."""
    if isinstance(exc, SyntaxError | tokenize.TokenError):
        return "its header is damaged"
    text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    if "allow_pickle" in text or "pickled" in text:
        return "it holds Python objects (an object array), not numbers"
    return text


def _numeric(name: str, arr: np.ndarray, what: str) -> np.ndarray:
    if arr.dtype.kind not in "fiu":
        raise InputError(f"{name}: {what} holds {arr.dtype} values, not numbers")
    return arr


def _read_npy(p: Path, name: str):
    streamed = _stream_npy(p, name)
    if streamed is not None:
        return streamed
    arr = _numeric(name, _load_npy(p, name), "the array")
    if arr.ndim != 2 or arr.shape[1] < 2:
        raise InputError(
            f"{name}: expected an array of shape (N, 2): time and signal columns, got {arr.shape}"
        )
    return _scan_table(name, arr, _row, [f"ch{k}" for k in range(1, arr.shape[1])])


def _npy_layout(f) -> tuple[int, int, np.dtype] | None:
    """``(rows, columns, dtype)`` of an open ``.npy`` file positioned after its header, when
    it is a plain C-ordered numeric table of at least two columns that the file holds whole;
    None for anything else (``numpy.load`` then reads it and names what is wrong)."""
    fmt = np.lib.format
    version = fmt.read_magic(f)
    if version == (1, 0):
        shape, fortran, dtype = fmt.read_array_header_1_0(f)
    elif version == (2, 0):
        shape, fortran, dtype = fmt.read_array_header_2_0(f)
    else:
        return None
    if fortran or len(shape) != 2 or shape[1] < 2 or dtype.hasobject or dtype.kind not in "fiu":
        return None
    rows, cols = int(shape[0]), int(shape[1])
    data_start = f.tell()
    if f.seek(0, 2) - data_start != rows * cols * dtype.itemsize or rows < 1:
        return None
    f.seek(data_start)
    return rows, cols, dtype


def _stream_npy(p: Path, name: str):
    """Read a ``.npy`` table straight into a contiguous time array and one contiguous array
    per channel, checking it chunk by chunk on the way (``_scan_table``'s checks): no copy of
    the whole table beside them, one pass over the data while it is in cache. None when the
    file is not a plain table (``numpy.load`` reads it then)."""
    if _signature(p) != _NPY_MAGIC:
        return None
    with open(p, "rb") as f:
        try:
            layout = _npy_layout(f)
        except _LOAD_ERRORS:
            return None
        if layout is None:
            return None
        n, cols, dtype = layout
        start_of_data = f.tell()
        native = dtype.newbyteorder("=")
        t_dtype = native if native in (np.float32, np.float64) else np.dtype(np.float64)
        t = np.empty(n, dtype=t_dtype)
        outs = [np.empty(n, dtype=native) for _ in range(1, cols)]
        # The first and last instants first: the grid check needs them before the pass.
        row = np.empty((1, cols), dtype=dtype)
        for i in (0, n - 1):
            f.seek(start_of_data + i * cols * dtype.itemsize)
            f.readinto(memoryview(row).cast("B"))
            t[i] = row[0, 0]
        f.seek(start_of_data)
        quantum = _float_quantum(t)
        scan = _TimeScan(name, t, _row, quantum)
        rows = max(1, _CHUNK // cols)
        buffer = np.empty((rows, cols), dtype=dtype)
        for start in range(0, n, rows):
            block = buffer[: min(rows, n - start)]
            if f.readinto(memoryview(block).cast("B")) != block.nbytes:
                raise InputError(f"{name}: not a readable NumPy file (it ends early)")
            stop = start + block.shape[0]
            _finite_chunk(name, block, _row, start)
            t[start:stop] = block[:, 0]
            scan.increasing(start, stop)
            scan.on_grid(start, stop)
            for k, out in enumerate(outs, start=1):
                out[start:stop] = block[:, k]
    channels = {f"ch{k}": out for k, out in enumerate(outs, start=1)}
    return t, channels, quantum, scan.off_grid


def _member(z, name: str, key: str) -> np.ndarray:
    """Array ``key`` of the open archive ``z`` (read here: NpzFile loads members lazily)."""
    try:
        arr = z[key]
    except _LOAD_ERRORS as exc:
        raise InputError(f"{name}: array {key!r} cannot be read ({_why(exc)})") from None
    return _numeric(name, arr, f"array {key!r}")


def _read_npz(p: Path, name: str):
    head = _signature(p)
    if head == _NPY_MAGIC:
        raise InputError(
            f"{name}: is a .npy file (one array), not an .npz archive: rename it to .npy"
        )
    if not head.startswith(_ZIP_MAGIC):
        raise InputError(
            f"{name}: not a readable NumPy file (not an .npz archive: no zip signature)"
        )
    # Our own file object, closed on every way out (numpy leaves its own open when the
    # archive's directory is damaged).
    with open(p, "rb") as f:
        try:
            z = np.load(f, allow_pickle=False)
        except _LOAD_ERRORS as exc:
            raise InputError(
                f"{name}: not a readable NumPy file (.npz archive: {_why(exc)})"
            ) from None
        if not hasattr(z, "files"):
            raise InputError(f"{name}: not an .npz archive")
        with z:
            t, channels = _npz_arrays(z, name)
    if not channels:
        raise InputError(f"{name}: no channel arrays beside 't'")
    scan = _TimeScan(name, t, _sample, _float_quantum(t))
    where_t = f"{name}: array 't'"
    for start in range(0, t.size, _CHUNK):
        stop = start + _CHUNK
        _finite_chunk(where_t, t[start:stop], _sample, start)
        scan.increasing(start, stop)
        scan.on_grid(start, stop)
    return t, channels, _float_quantum(t), scan.off_grid


def _npz_arrays(z, name: str) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """``t`` and the channel arrays of the open archive ``z``, each checked."""
    if "t" not in z.files:
        raise InputError(f"{name}: no array named 't' (arrays: {', '.join(z.files) or 'none'})")
    t = _time_column(_member(z, name, "t").ravel())
    channels = {}
    for key in z.files:
        if key == "t" or key.startswith("meta_"):
            continue  # meta_* arrays describe the record (``bringup capture``), not channels
        arr = _member(z, name, key)
        if arr.ndim != 1 or arr.size != t.size:
            raise InputError(
                f"{name}: array {key!r} has shape {arr.shape}, expected ({t.size},) like 't'"
            )
        _check_finite(f"{name}: array {key!r}", arr, _sample)
        channels[key] = arr
    return t, channels


# --- CSV -----------------------------------------------------------------------------------


def _split(line: str, delimiter: str | None, trailing: bool = False) -> list[str]:
    """The cells of a line; with ``trailing``, one empty cell after a last delimiter is dropped."""
    if trailing and delimiter and line.endswith(delimiter):
        line = line[: -len(delimiter)]
    parts = line.split(delimiter) if delimiter else line.split()
    return [s.strip().strip('"').strip("'").strip() for s in parts]


def _rows_for_numpy(lines, trailing: str | None, decimal_comma: bool):
    """Lines for numpy: one ``trailing`` delimiter removed, "0,5" read as 0.5 with
    ``decimal_comma``."""
    for line in lines:
        s = line.rstrip()
        if trailing and s.endswith(trailing):
            s = s[: -len(trailing)]
        yield s.replace(",", ".") if decimal_comma else s


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


def _csv_head(p: Path, name: str, encoding: str):
    """The start of a CSV file: comments, header (names, maybe units), first data line.

    Returns (header names or None, delimiter or None for whitespace, whether rows end with
    a delimiter, the first data row's line number or None, the header rows' line numbers,
    the first data row's fields)."""
    header: list[str] | None = None
    delimiter: str | None = None
    trailing = False  # rows end with a delimiter ("0,1.5,"): not an empty column
    data_line = None  # 1-based line number of the first data row
    head_lines: list[int] = []  # line numbers of the header (and units) rows
    fields: list[str] = []
    with open(p, encoding=encoding) as f:
        for line_no, line in enumerate(f, start=1):
            line = line.strip()
            if not line or line.startswith("#"):
                continue
            if delimiter is None:
                delimiter = _sniff([line])
            fields = _split(line, delimiter)
            hexa = next((k for k, x in enumerate(fields, 1) if _HEX.match(x)), None)
            if hexa is not None:
                raise InputError(
                    f"{name}: line {line_no}, column {hexa}: hexadecimal number "
                    f"{fields[hexa - 1]!r} (write the values in decimal)"
                )
            cells = fields
            if delimiter and len(fields) > 1 and fields[-1] == "":
                cells = fields[:-1]  # "0,1.5,": the row ends with its delimiter
            if all(_NUMBER.match(x) for x in cells):
                trailing = cells is not fields
                fields = cells
                data_line = line_no
                break
            head_lines.append(line_no)
            if len(head_lines) == 1:
                header = fields
            elif len(head_lines) > 2:
                raise InputError(
                    f"{name}: line {line_no}: non-numeric cell {_first_bad(fields)!r} "
                    "(a CSV capture has at most a header row and a units row)"
                )
    return header, delimiter, trailing, data_line, head_lines, fields


def _csv_rows(
    p: Path, name: str, encoding: str, data_line: int, delimiter, ncols: int, trailing: bool
) -> np.ndarray:
    """The data rows from ``data_line`` on as a float array; a row numpy cannot read is an
    ``InputError`` naming its line."""
    # With semicolons a comma can only be a decimal comma, on any row (the first row of a
    # log often holds whole numbers: "0;0").
    decimal_comma = delimiter == ";"
    try:
        if decimal_comma or trailing:
            with open(p, encoding=encoding) as f:
                lines = (x for k, x in enumerate(f, 1) if k >= data_line)
                data = np.loadtxt(
                    _rows_for_numpy(lines, delimiter if trailing else None, decimal_comma),
                    delimiter=delimiter,
                    comments="#",
                    ndmin=2,
                    dtype=np.float64,
                    quotechar='"',
                )
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
            _locate(name, p, encoding, data_line, delimiter, ncols, decimal_comma, trailing, exc)
        ) from None
    return data


def _read_csv_as(p: Path, name: str, encoding: str):
    header, delimiter, trailing, data_line, head_lines, fields = _csv_head(p, name, encoding)
    if data_line is None:
        raise InputError(f"{name}: no data rows (only comments or a header)")

    ncols = len(fields)
    # A header written with the same trailing delimiter ("time,gate,") has one empty name
    # more than the data has columns; an empty name inside the data's width is kept (ch<n>).
    if header is not None and len(header) == ncols + 1 and header[-1] == "":
        header = header[:-1]
    if ncols < 2:
        raise InputError(
            f"{name}: line {data_line}: need a time column and at least one signal column"
        )
    data = _csv_rows(p, name, encoding, data_line, delimiter, ncols, trailing)
    if data.shape[1] != ncols:
        raise InputError(f"{name}: line {data_line}: expected {ncols} columns")
    if data.shape[0] < 2:
        taken = (
            f" (line{'s' if len(head_lines) > 1 else ''} "
            f"{' and '.join(map(str, head_lines))} read as the header)"
            if head_lines
            else ""
        )
        raise InputError(f"{name}: line {data_line}: needs at least 2 samples, got 1{taken}")

    def where(i: int) -> str:
        return f"line {_line_of_row(p, encoding, data_line, i)}"

    names = _channel_names(name, header, ncols)
    decimal_comma = delimiter == ";"
    printed = _printed_quantum(p, encoding, data_line, delimiter, trailing, decimal_comma)
    t, channels, quantum, off_grid = _scan_table(name, data, where, names, printed)
    return t, channels, where, quantum, off_grid


# A decimal number as printed: integer digits, fraction digits, exponent.
_DECIMAL = re.compile(r"^[+-]?(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?$")
_PRECISION_ROWS = 200  # rows read at each end of a CSV file to find its time resolution


def _printed_quantum(p: Path, encoding: str, data_line: int, delimiter, trailing, decimal_comma):
    """The resolution (s) the time column is printed to, at its largest instants: the place of
    the last printed digit ("1.2345e-03" -> 1e-7, "0.0125" -> 1e-4, "12" -> 1).

    Read from the first and last rows (the largest |t| is at one end of an increasing time).
    Of the cells in the highest decade, the finest last digit counts: a writer that drops
    trailing zeros ("%g": 0.01 for 0.0100000) prints fewer digits on some rows than it
    rounded to, never more.
    """
    cells = []
    for _, line in itertools.islice(_data_lines(p, encoding, data_line), _PRECISION_ROWS):
        cells.append(line)
    cells.extend(_last_lines(p, encoding, _PRECISION_ROWS))
    best: tuple[int, int] | None = None  # (decade of the leading digit, place of the last)
    for line in cells:
        fields = _split(line, delimiter, trailing)
        if not fields:
            continue
        text = fields[0].replace(",", ".") if decimal_comma else fields[0]
        m = _DECIMAL.match(text)
        if not m or not (m.group(1) or m.group(2)):
            continue
        whole, frac, exp = m.group(1) or "", m.group(2) or "", int(m.group(3) or 0)
        digits = (whole + frac).lstrip("0")
        if not digits:
            continue  # zero: no leading digit
        lead = exp + len(whole) - 1 - (len(whole + frac) - len(digits))
        last = exp - len(frac)
        if best is None or lead > best[0] or (lead == best[0] and last < best[1]):
            best = (lead, last)
    return 0.0 if best is None else 10.0 ** best[1]


def _last_lines(p: Path, encoding: str, count: int) -> list[str]:
    """The last ``count`` data lines of a file (stripped; comments and blank lines skipped),
    read from its last 64 kB."""
    with open(p, "rb") as f:
        size = f.seek(0, 2)
        f.seek(max(0, size - 65536))
        tail = f.read().decode(encoding, errors="replace").splitlines()
    if size > 65536:
        tail = tail[1:]  # the first line read is a partial one
    lines = [s.strip() for s in tail]
    return [s for s in lines if s and not s.startswith("#")][-count:]


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


def _locate(name, p, encoding, data_line, delimiter, ncols, decimal_comma, trailing, exc) -> str:
    """One line naming the first bad row of a CSV file that numpy refused (slow path)."""
    for number, line in _data_lines(p, encoding, data_line):
        fields = _split(line, delimiter, trailing)
        if decimal_comma:
            fields = [f.replace(",", ".") for f in fields]
        if len(fields) != ncols:
            return f"{name}: line {number}: {len(fields)} columns, expected {ncols}"
        for col, f in enumerate(fields, start=1):
            if _HEX.match(f):
                return (
                    f"{name}: line {number}, column {col}: hexadecimal number {f!r} "
                    "(write the values in decimal)"
                )
            try:
                value = float(f)
            except ValueError:
                return f"{name}: line {number}, column {col}: not a number: {f!r}"
            if not math.isfinite(value):
                return f"{name}: line {number}, column {col}: NaN or infinite value"
    return f"{name}: cannot read the CSV data ({str(exc).splitlines()[0]})"
