"""Where a session's instruments come from: a bench file, or a simulated bench in-process."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

__all__ = ["BenchSource", "DEFAULT_SIM_TIME_SCALE", "UNPACED"]

#: Simulated seconds per real second for a simulated bench started by the runner: a 20-minute
#: soak passes in 1.2 s of wall time.
DEFAULT_SIM_TIME_SCALE = 1000.0
#: A simulated bench nobody watches (a headless run without ``--time-scale``): its clock is held
#: and moves only by the bench's own waits (supply dwells, soak intervals), with no wall-clock
#: wait for them: the simulated physics sees the same bench time, the run takes none.
UNPACED = 0.0


@dataclass(frozen=True)
class BenchSource:
    """A bench file (``path``) or a simulated bench (``scenario``, ``seed``, ``time_scale``)."""

    path: Path | None = None
    scenario: str | None = None
    seed: int = 0
    time_scale: float = DEFAULT_SIM_TIME_SCALE

    @classmethod
    def simulated(
        cls, scenario: str = "healthy", seed: int = 0, time_scale: float = DEFAULT_SIM_TIME_SCALE
    ) -> BenchSource:
        """A simulated bench started in-process on 127.0.0.1 for this session."""
        return cls(path=None, scenario=scenario, seed=seed, time_scale=time_scale)

    @classmethod
    def from_file(cls, path: str | Path) -> BenchSource:
        """The instruments named by a bench file (TOML, see ``bringup.instruments.bench``)."""
        return cls(path=Path(path))

    @property
    def is_simulated(self) -> bool:
        """True for a simulated bench started by the runner."""
        return self.path is None

    def describe(self) -> dict:
        """The bench as logged with the session (and used by ``resume``)."""
        if self.is_simulated:
            return {"kind": "simulated", "scenario": self.scenario, "seed": self.seed,
                    "time_scale": self.time_scale}  # fmt: skip
        return {"kind": "file", "path": str(self.path)}

    @classmethod
    def from_description(cls, data: dict | None) -> BenchSource | None:
        """Inverse of :meth:`describe` (None when the log holds no usable description)."""
        if not data:
            return None
        if data.get("kind") == "simulated":
            scale = data.get("time_scale")
            return cls.simulated(str(data.get("scenario") or "healthy"), int(data.get("seed") or 0),
                                 DEFAULT_SIM_TIME_SCALE if scale is None else float(scale))  # fmt: skip
        if data.get("kind") == "file" and data.get("path"):
            return cls.from_file(data["path"])
        return None
