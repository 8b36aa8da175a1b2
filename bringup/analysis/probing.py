"""What the measuring chain adds to a rise time, and when an edge is too fast to judge.

A scope and its probe have their own step response; on an edge they add their own rise time.
For responses close to Gaussian (no overshoot; most scopes up to about 1 GHz and passive
probes) the cascade's rise time is the root sum of squares of the parts' (REFERENCES §9, probe
primers [read]), and each part's is about 0.35/BW (REFERENCES §2: ln 9/(2 pi) = 0.3497 for a
single pole [computed]; about 0.45/BW for a steep, brick-wall roll-off [read]). So

    t_chain = sqrt(sum (0.35/BW_i)^2),   t_edge = sqrt(t_measured^2 - t_chain^2).

Limit of validity: the correction is good when the chain is several times faster than the
edge (at 3x it removes 5.7 % of the reading [computed] and a 0.45/BW chain instead of 0.35/BW
moves the result by 4 % [computed]); it degrades quickly as the two approach. Below
``RESOLVED_RATIO`` = 1.4 x the chain's own rise time the edge is not resolved and is not
judged: there the correction removes 30 % of the reading [computed] and the 0.35 vs 0.45
uncertainty of the chain's rise time alone moves the corrected value by about 43 %
[computed: sqrt(1 - 1/1.96) = 0.700 vs sqrt(1 - (0.45/0.35)^2/1.96) = 0.396] - more than any
guard band, so a pass or a fail there would be the chain's, not the board's. 1.4 is also
where sqrt(2) puts the edge and the chain at equal rise times.

Pure functions, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass

__all__ = [
    "RISE_BANDWIDTH_PRODUCT",
    "RESOLVED_RATIO",
    "VALID_RATIO",
    "RiseCorrection",
    "chain_rise_time",
    "correct_rise_time",
]

#: t_r x BW of a single-pole or Gaussian-like response (ln 9/(2 pi) = 0.3497, REFERENCES §2).
RISE_BANDWIDTH_PRODUCT = 0.35
#: Measured/chain rise time below which the edge is not resolved (see the module doc).
RESOLVED_RATIO = 1.4
#: Measured/chain rise time from which the correction is small and well known (<= 6 %).
VALID_RATIO = 3.0


@dataclass(frozen=True)
class RiseCorrection:
    """A rise (or fall) time with the chain's part removed. Seconds.

    ``measured_s``: as read; ``chain_s``: the scope and probe's own rise time; ``corrected_s``:
    sqrt(measured^2 - chain^2), None when the edge is not resolved; ``ratio``: measured/chain;
    ``resolved``: ratio >= ``RESOLVED_RATIO`` (only then may the value be judged); ``note``:
    one line for the reader (the correction and how far to trust it, or why it is refused).
    """

    measured_s: float
    chain_s: float
    corrected_s: float | None
    ratio: float
    resolved: bool
    note: str

    def to_dict(self) -> dict:
        return asdict(self)


def chain_rise_time(bandwidths_hz: Iterable[float | None]) -> float:
    """Rise time (s) of the cascade of parts with -3 dB bandwidths ``bandwidths_hz`` (Hz):
    sqrt(sum (0.35/BW_i)^2). ``None`` entries (unknown) are skipped; an empty chain is 0.
    Raises ``ValueError`` for a bandwidth that is not a positive finite number."""
    total = 0.0
    for bw in bandwidths_hz:
        if bw is None:
            continue
        if isinstance(bw, bool) or not (math.isfinite(float(bw)) and float(bw) > 0):
            raise ValueError(f"a bandwidth must be a positive number of Hz, got {bw!r}")
        total += (RISE_BANDWIDTH_PRODUCT / float(bw)) ** 2
    return math.sqrt(total)


def correct_rise_time(measured_s: float, chain_s: float) -> RiseCorrection:
    """Remove the chain's rise time ``chain_s`` from ``measured_s`` (both s) by root sum of
    squares; refuse (``corrected_s`` None, ``resolved`` False) below ``RESOLVED_RATIO``."""
    m, c = float(measured_s), float(chain_s)
    if not (math.isfinite(m) and m > 0):
        raise ValueError(f"a measured rise time must be a positive number of s, got {measured_s!r}")
    if not (math.isfinite(c) and c >= 0):
        raise ValueError(f"a chain rise time must be a number of s >= 0, got {chain_s!r}")
    if c == 0:
        return RiseCorrection(m, 0.0, m, math.inf, True, "no chain bandwidth known: as measured")
    ratio = m / c
    if ratio < RESOLVED_RATIO:
        return RiseCorrection(
            m, c, None, ratio, False,
            f"{_ns(m)} measured is only {ratio:.2f}x the scope and probe's own {_ns(c)} "
            f"(below {RESOLVED_RATIO:g}x): the edge is faster than the chain resolves, not "
            "judged; use a faster scope or probe",
        )  # fmt: skip
    corrected = math.sqrt(m * m - c * c)
    trust = (
        "small and well known"
        if ratio >= VALID_RATIO
        else "large: the chain's 0.35/BW is only approximate, treat the edge with care"
    )
    note = (
        f"{_ns(m)} measured, {_ns(corrected)} after removing the scope and probe's own "
        f"{_ns(c)} (root sum of squares; the correction is {100 * (1 - corrected / m):.1f} %, "
        f"{trust})"
    )
    return RiseCorrection(m, c, corrected, ratio, True, note)


def _ns(seconds: float) -> str:
    return f"{seconds * 1e9:.3g} ns"
