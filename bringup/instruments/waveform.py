"""A scope record as it came off the wire: raw codes plus the scale to turn them into volts."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class Waveform:
    """One record of one source (``CH1``..``CH4`` or ``MATH``).

    ``codes`` are the instrument's raw values in native byte order (``np.int8``, ``np.int16``
    or ``np.float32``), kept so that the store can keep them compactly. Volts at the probe tip
    are ``codes * y_increment + y_origin``; the time of sample i relative to the trigger is
    ``i * x_increment + x_origin`` seconds.
    """

    source: str
    codes: np.ndarray
    y_increment: float  # volts per code
    y_origin: float  # volts at code 0
    x_increment: float  # seconds per sample
    x_origin: float  # seconds, time of sample 0 relative to the trigger (negative = before)

    @property
    def points(self) -> int:
        """Number of samples."""
        return int(self.codes.size)

    @property
    def duration_s(self) -> float:
        """Record duration in seconds (points x sample interval)."""
        return self.points * self.x_increment

    def volts(self) -> np.ndarray:
        """The samples in volts (float64)."""
        return self.codes.astype(np.float64) * self.y_increment + self.y_origin

    def times(self) -> np.ndarray:
        """Sample times in seconds relative to the trigger (float64)."""
        return np.arange(self.points, dtype=np.float64) * self.x_increment + self.x_origin
