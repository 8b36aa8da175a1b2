"""Start the simulated bench: scope, supply and thermometer servers on 127.0.0.1, one shared model.

    with start_bench(design, scenario="slow-gate", seed=3) as bench:
        bench.resources["scope"]            # "TCPIP::127.0.0.1::PORT::SOCKET"
        bench.scope.faults.inject("drop")   # fault injection from Python
        bench.supply.output_on              # instrument state, for tests
        text = bench.bench_file_text()      # a bench file pointing at these servers

The servers run in daemon threads of this process; ``stop()`` (or leaving the ``with``) turns
the supply output OFF and closes every connection.
"""

from __future__ import annotations

import threading
from collections.abc import Mapping
from dataclasses import dataclass

from sim_instruments.clock import SharedBoard, SimClock
from sim_instruments.faults import FaultInjector
from sim_instruments.meter_dialects import HEATSINK_CHANNEL, DmmThermometer, LoggerThermometer
from sim_instruments.multi_supply import SelectSupply, TripleSupply
from sim_instruments.scope import Scope
from sim_instruments.scope_dialects import scope_speaking
from sim_instruments.server import ScpiServer
from sim_instruments.supply import Supply
from sim_instruments.thermometer import Thermometer

__all__ = ["RunningBench", "start_bench", "PROFILES", "DIALECTS"]

#: The command profile each simulated instrument is driven with (bench file ``profile``).
PROFILES = {"scope": "sim-scope", "supply": "sim-supply", "thermometer": "sim-thermometer"}


@dataclass(frozen=True)
class Dialect:
    """One way a simulated instrument can be spoken to: the class that speaks it, the shipped
    profile written for that family of instruments, and the bench file's extra keys (which
    channel feeds the board or carries the heatsink's thermocouple)."""

    cls: type
    profile: str
    bench_keys: tuple[tuple[str, str], ...] = ()


#: Dialects per instrument kind; "nullpoint" is the simulator's own.
DIALECTS: dict[str, dict[str, Dialect]] = {
    "scope": {
        "nullpoint": Dialect(Scope, "sim-scope"),
        "tenfield": Dialect(scope_speaking("tenfield"), "rigol-ds1000z"),
        "outpre": Dialect(scope_speaking("outpre"), "tektronix-mdo3000"),
    },
    "supply": {
        "nullpoint": Dialect(Supply, "sim-supply"),
        "triple": Dialect(TripleSupply, "triple-output-argument", (("channel", '"CH2"'),)),
        "select": Dialect(SelectSupply, "quad-output-select", (("channel", "3"),)),
    },
    "thermometer": {
        "nullpoint": Dialect(Thermometer, "sim-thermometer"),
        "dmm": Dialect(DmmThermometer, "dmm-thermocouple", (("thermocouple", '"K"'),)),
        "logger": Dialect(
            LoggerThermometer,
            "logger-thermocouple",
            (("channel", str(HEATSINK_CHANNEL)), ("thermocouple", '"K"')),
        ),
    },
}


class RunningBench:
    """A started simulated bench. ``resources`` maps "scope"/"supply"/"thermometer" to VISA
    resource strings; ``model`` is the shared ``StageModel``; ``clock`` the simulated clock."""

    def __init__(
        self,
        board: SharedBoard,
        scope: Scope,
        supply: Supply,
        thermometer: Thermometer,
        servers: dict[str, ScpiServer],
        seed: int,
        dialects: Mapping[str, str] | None = None,
    ) -> None:
        self.board = board
        self.model = board.model
        self.clock = board.clock
        self.scope = scope
        self.supply = supply
        self.thermometer = thermometer
        self.servers = servers
        self.seed = seed
        self.dialects = {kind: "nullpoint" for kind in DIALECTS} | dict(dialects or {})
        self.resources: dict[str, str] = {name: srv.resource for name, srv in servers.items()}
        self._stopped = False

    @property
    def scenario(self) -> str:
        return self.board.scenario

    def bench_file_text(self) -> str:
        """A TOML bench file (contract in DEVELOPERS.md) pointing at these servers."""
        lines = [
            "# Simulated bench served by `bringup sim` on 127.0.0.1 "
            f'(scenario "{self.scenario}", seed {self.seed}).',
            "# It is rebuilt each time the simulator starts: the ports change.",
            "",
        ]
        for name in ("scope", "supply", "thermometer"):
            dialect = DIALECTS[name][self.dialects[name]]
            lines += [f"[{name}]", f'resource = "{self.resources[name]}"']
            lines += [f'profile = "{dialect.profile}"']
            lines += [f"{key} = {value}" for key, value in dialect.bench_keys]
            if name == "supply":
                # the simulated supply's read-back specification (its readings lie within it):
                # +/-(0.05 % + 10 mV) and +/-(0.1 % + 2 mA), for the read-backs' GUM budgets
                lines += ["voltage_accuracy = [0.0005, 0.010]", "current_accuracy = [0.001, 0.002]"]
            lines += [""]
            if name == "scope":
                for n, probe in sorted(self.scope.probes.items()):
                    lines += [f"[scope.channels.{n}]", f'net = "{probe.net}"']
                    lines += [f"probe_ratio = {probe.ratio:g}"]
                    if probe.kind == "CURR":
                        # a current probe: its ratio in A/V, and its lag behind the voltage
                        # probes as a bench measures it on a resistive step
                        lines += [f"deskew_s = {probe.skew_s:.3g}"]
                    lines += [""]
        lines += ["[simulation]", "enabled = true", ""]
        return "\n".join(lines)

    def stop(self) -> None:
        """Supply output OFF, then close every server and connection. Safe to call twice."""
        if self._stopped:
            return
        self._stopped = True
        self.supply.turn_off()
        for server in self.servers.values():
            server.stop()

    def __enter__(self) -> RunningBench:
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop()


def start_bench(
    design: Mapping[str, float],
    scenario: str = "healthy",
    seed: int = 0,
    port_base: int = 0,
    host: str = "127.0.0.1",
    time_scale: float = 600.0,
    dialects: Mapping[str, str] | None = None,
) -> RunningBench:
    """Build the model and serve the three instruments.

    ``design``: the board's ``[design]`` values as SI floats. ``port_base`` 0 picks free ports,
    otherwise scope = P, supply = P+1, thermometer = P+2. ``time_scale``: simulated seconds per
    wall second for the thermal model. ``dialects``: kind -> dialect name (``DIALECTS``; the
    simulator's own, "nullpoint", where not given). Raises ``ValueError`` for an unknown scenario (from the
    model) and ``OSError`` when a port cannot be bound.
    """
    from sim_instruments.half_bridge import build_model

    chosen = {kind: "nullpoint" for kind in DIALECTS} | dict(dialects or {})
    for kind, name in chosen.items():
        if kind not in DIALECTS:
            raise ValueError(f"no instrument kind {kind!r} (one of {', '.join(DIALECTS)})")
        if name not in DIALECTS[kind]:
            known = ", ".join(DIALECTS[kind])
            raise ValueError(f"no {kind} dialect {name!r} (one of {known})")
    model = build_model(design, scenario=scenario, seed=seed)
    lock = threading.RLock()
    board = SharedBoard(model, design, SimClock(time_scale), lock)
    scope = DIALECTS["scope"][chosen["scope"]].cls(f"SC{seed:05d}", board, FaultInjector(), seed)
    supply = DIALECTS["supply"][chosen["supply"]].cls(f"PS{seed:05d}", board, FaultInjector(), seed)
    thermometer = DIALECTS["thermometer"][chosen["thermometer"]].cls(
        f"TH{seed:05d}", board, FaultInjector(), seed
    )
    servers: dict[str, ScpiServer] = {}
    try:
        for i, (name, inst) in enumerate(
            (("scope", scope), ("supply", supply), ("thermometer", thermometer))
        ):
            port = port_base + i if port_base else 0
            servers[name] = ScpiServer(inst, host, port).start()
    except BaseException:
        for server in servers.values():
            server.stop()
        raise
    return RunningBench(board, scope, supply, thermometer, servers, seed, chosen)
