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
# Uniform sampling tolerance: each instant within this fraction of dt of the ideal grid
# (times printed with few digits are still read as a uniform record).
UNIFORM_TOLERANCE = 0.5


@dataclass(frozen=True)
class Capture:
    """A capture: ``t_s`` (s, increasing) and the channels by name (same length as ``t_s``)."""

    path: str
    t_s: np.ndarray
    channels: dict[str, np.ndarray]
    # Where sample i is in the file ("line 12" of a CSV, "row 3" of a .npy, "sample 3").
    locate: Callable[[int], str] = field(
        default=lambda i: f"sample {i + 1}", repr=False, compare=False
    )

    def where(self, i: int) -> str:
        """Where sample ``i`` (0-based) is in the file, for an error message."""
        return self.locate(i)

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
        locate = _row
    elif suffix == ".npz":
        t, channels = _read_npz(p, name)
        locate = _sample
    else:
        t, channels, locate = _read_csv(p, name)
    return Capture(name, t, channels, locate)


def _row(i: int) -> str:
    return f"row {i + 1}"


def _sample(i: int) -> str:
    return f"sample {i + 1}"


def _check_time(name: str, t: np.ndarray, where) -> None:
    if t.size < 2:
        raise InputError(f"{name}: {where(0)}: needs at least 2 samples, got {t.size}")
    bad = np.flatnonzero(~(np.diff(t) > 0))
    if bad.size:
        i = int(bad[0]) + 1
        raise InputError(
            f"{name}: {where(i)}: the time does not increase ({t[i]:.9g} s after {t[i - 1]:.9g} s)"
        )


def _check_finite(name: str, data: np.ndarray, where) -> None:
    """Refuse NaN, infinite and overrange (|x| >= 9.9E37) samples, naming the first one."""
    if data.dtype.kind in "iu":
        if data.size == 0 or (data.min() > -OVERRANGE and data.max() < OVERRANGE):
            return
    # One comparison catches all three: NaN compares False, inf and overrange are not below.
    ok = (data < OVERRANGE) & (data > -OVERRANGE)
    if ok.all():
        return
    i = int(np.flatnonzero(~ok.all(axis=1) if data.ndim == 2 else ~ok)[0])
    column = ""
    if data.ndim == 2:
        k = int(np.flatnonzero(~ok[i])[0])
        value, column = float(data[i, k]), f", column {k + 1}"
    else:
        value = float(data[i])
    if not math.isfinite(value):
        raise InputError(f"{name}: {where(i)}: NaN or infinite value")
    raise InputError(
        f"{name}: {where(i)}{column}: overrange value {value:.6g} "
        "(|value| >= 9.9E37, the SCPI no-value number)"
    )


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
    arr = _numeric(name, _load_npy(p, name), "the array")
    if arr.ndim != 2 or arr.shape[1] < 2:
        raise InputError(
            f"{name}: expected an array of shape (N, 2): time and signal columns, got {arr.shape}"
        )
    _check_finite(name, arr, _row)
    t = np.ascontiguousarray(arr[:, 0], dtype=np.float64)
    _check_time(name, t, _row)
    channels = {f"ch{k}": np.ascontiguousarray(arr[:, k]) for k in range(1, arr.shape[1])}
    return t, channels


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
    _check_finite(f"{name}: array 't'", t, _sample)
    _check_time(name, t, _sample)
    return t, channels


def _npz_arrays(z, name: str) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """``t`` and the channel arrays of the open archive ``z``, each checked."""
    if "t" not in z.files:
        raise InputError(f"{name}: no array named 't' (arrays: {', '.join(z.files) or 'none'})")
    t = np.asarray(_member(z, name, "t"), dtype=np.float64).ravel()
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


def _read_csv_as(p: Path, name: str, encoding: str):
    # Look at the start of the file: comments, header (names, maybe units), first data line.
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

    _check_finite(name, data, where)
    t = np.ascontiguousarray(data[:, 0])
    _check_time(name, t, where)

    names = _channel_names(name, header, ncols)
    channels = {n: np.ascontiguousarray(data[:, k + 1]) for k, n in enumerate(names)}
    return t, channels, where


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
