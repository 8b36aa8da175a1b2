"""Waveforms kept compactly: the instrument's raw codes plus the scale that turns them into volts.

A scope sends integer ADC codes (``INTeger,8``/``INTeger,16`` formats) or 32-bit floats, with a
preamble giving the scale. We store exactly those codes, never volts as float64, together with

    volts = code * y_increment + y_origin        time = index * x_increment + x_origin

(the preamble convention of ``sim_instruments/README.md``, ``TRACe:PREamble?``), so nothing the
instrument sent is lost or rounded.

Compression (chosen by measurement, see ``benchmarks/bench_store.py``): Blosc with the
bit-shuffle filter and LZ4. Bit-shuffling regroups bit *k* of every sample together, so the
slowly changing high bits of a waveform become long runs that LZ4 removes at memory speed; on a
noisy 10 Mpt int16 gate waveform it gave 9 % of the float64 size in about 8 ms, where stdlib
zlib at level 1 took about 250 ms for 10 %. The blob is a sequence of self-describing Blosc
chunks (each at most 64 MiB uncompressed), so any size fits under Blosc's 2 GiB buffer limit.

``raw_sha256`` is the SHA-256 of the codes as little-endian bytes: it names the data, not its
compressed form, so the hash chain does not depend on the codec.
"""

from __future__ import annotations

import hashlib
import math
import threading
from dataclasses import dataclass, field

import blosc
import numpy as np

__all__ = [
    "StoredWaveform",
    "EncodedWaveform",
    "encode_waveform",
    "decode_codes",
    "codes_digest",
    "CODEC",
    "DTYPES",
]

#: The codec name stored beside every blob (one codec in schema 1).
CODEC = "blosc-lz4-bitshuffle"
#: Sample types a waveform may carry (stored little-endian).
DTYPES = ("int8", "uint8", "int16", "uint16", "int32", "float32", "float64")
_CHUNK_BYTES = 64 * 1024 * 1024
_PARALLEL_DIGEST_BYTES = 1024 * 1024

blosc.set_releasegil(True)  # compression runs in worker threads: let the UI thread run
blosc.set_nthreads(max(1, min(4, blosc.detect_number_of_cores())))


@dataclass(eq=False)
class StoredWaveform:
    """One acquired record: raw ``codes`` (1-D) and the scale to volts and seconds.

    ``volts = codes * y_increment + y_origin`` (``y_unit``, normally "V");
    ``time_s = index * x_increment + x_origin`` (``x_unit``, normally "s").
    For float samples that already are volts, use ``y_increment=1.0, y_origin=0.0``.
    """

    codes: np.ndarray
    x_increment: float
    x_origin: float = 0.0
    y_increment: float = 1.0
    y_origin: float = 0.0
    y_unit: str = "V"
    x_unit: str = "s"
    meta: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        codes = np.asarray(self.codes)
        if codes.ndim != 1:
            raise ValueError(f"a waveform is one-dimensional, got shape {codes.shape}")
        name = (
            codes.dtype.newbyteorder("=").name if codes.dtype.byteorder != "|" else codes.dtype.name
        )
        if name not in DTYPES:
            raise ValueError(f"waveform samples of type {codes.dtype} are not stored; use {DTYPES}")
        # Big-endian blocks (IEEE 488.2 NORMal byte order) become native little-endian here.
        self.codes = np.ascontiguousarray(codes, dtype=np.dtype(name).newbyteorder("<"))
        for attr in ("x_increment", "x_origin", "y_increment", "y_origin"):
            # numpy scalars -> float (never a blob); + 0.0 maps -0.0 to 0.0 as SQLite would
            number = float(getattr(self, attr)) + 0.0
            if not math.isfinite(number):
                raise ValueError(f"waveform {attr} must be finite, got {number!r}")
            setattr(self, attr, number)
        self.y_unit = str(self.y_unit)
        self.x_unit = str(self.x_unit)

    @property
    def dtype(self) -> str:
        """Sample type name, e.g. ``"int16"``."""
        return self.codes.dtype.name

    def __len__(self) -> int:
        return int(self.codes.shape[0])

    def volts(self) -> np.ndarray:
        """The samples in ``y_unit`` as float64: ``codes * y_increment + y_origin``."""
        return self.codes.astype(np.float64) * self.y_increment + self.y_origin

    def times(self) -> np.ndarray:
        """Sample times in ``x_unit`` (seconds) as float64: ``index * x_increment + x_origin``."""
        return np.arange(len(self), dtype=np.float64) * self.x_increment + self.x_origin

    def scale(self) -> dict:
        """The scale as plain data (what the hash chain covers besides the codes' digest)."""
        return {
            "dtype": self.dtype,
            "points": len(self),
            "x_increment": self.x_increment,
            "x_origin": self.x_origin,
            "y_increment": self.y_increment,
            "y_origin": self.y_origin,
            "y_unit": self.y_unit,
            "x_unit": self.x_unit,
        }


@dataclass(frozen=True)
class EncodedWaveform:
    """What goes into a ``waveforms`` row: the compressed blob and its digest."""

    data: bytes
    codec: str
    raw_sha256: str


def codes_digest(codes: np.ndarray) -> str:
    """SHA-256 of the codes as contiguous little-endian bytes (64 hex digits)."""
    return hashlib.sha256(memoryview(np.ascontiguousarray(codes))).hexdigest()


def encode_waveform(waveform: StoredWaveform) -> EncodedWaveform:
    """Compress ``waveform.codes`` (Blosc, bit-shuffle, LZ4; chunks of at most 64 MiB).

    The SHA-256 of a large record is computed in a helper thread while Blosc compresses
    (both release the GIL), which hides most of the digest's time.
    """
    raw = memoryview(waveform.codes).cast("B")
    digest: list[str] = []
    helper = None
    if raw.nbytes >= _PARALLEL_DIGEST_BYTES:
        helper = threading.Thread(target=lambda: digest.append(codes_digest(waveform.codes)))
        helper.start()
    chunks = [
        blosc.compress(
            raw[start : start + _CHUNK_BYTES],
            typesize=waveform.codes.dtype.itemsize,
            clevel=5,
            shuffle=blosc.BITSHUFFLE,
            cname="lz4",
        )
        for start in range(0, max(raw.nbytes, 1), _CHUNK_BYTES)
    ]
    if helper is not None:
        helper.join()
    else:
        digest.append(codes_digest(waveform.codes))
    return EncodedWaveform(b"".join(chunks) if len(chunks) > 1 else chunks[0], CODEC, digest[0])


def decode_codes(data: bytes, codec: str, dtype: str, points: int) -> np.ndarray:
    """Inverse of :func:`encode_waveform`; raises ``ValueError`` on a damaged blob."""
    if codec != CODEC:
        raise ValueError(f"unknown waveform codec {codec!r}")
    if dtype not in DTYPES:
        raise ValueError(f"unknown waveform sample type {dtype!r}")
    view = memoryview(data)
    parts: list[bytes] = []
    offset = 0
    while offset < len(view):
        header = bytes(view[offset : offset + 16])
        if len(header) < 16 or not blosc.cbuffer_validate(bytes(view[offset:])):
            raise ValueError("waveform blob is damaged (bad compressed chunk header)")
        _, cbytes, _ = blosc.get_cbuffer_sizes(header)
        if cbytes <= 0 or offset + cbytes > len(view):
            raise ValueError("waveform blob is damaged (truncated chunk)")
        try:
            parts.append(blosc.decompress(bytes(view[offset : offset + cbytes])))
        except Exception as error:  # blosc_extension.error: damaged compressed data
            raise ValueError(f"waveform blob is damaged ({error})") from None
        offset += cbytes
    raw = b"".join(parts)
    expected = points * np.dtype(dtype).itemsize
    if len(raw) != expected:
        raise ValueError(f"waveform blob holds {len(raw)} bytes, expected {expected}")
    return np.frombuffer(raw, dtype=np.dtype(dtype).newbyteorder("<")).copy()
