"""The runner's hold on the bench: opens it, plays the operator's hands on a simulated one,
powers the board only through the instrument layer's safe-state owner, acquires.

Every instrument call goes through ``bringup.instruments``; nothing here talks SCPI itself.
"""

from __future__ import annotations

import tempfile
import time
from collections.abc import Callable
from pathlib import Path

from bringup.boards.board_file import Board
from bringup.checklist.model import Step
from bringup.runner.analyses import Trace, clipping
from bringup.runner.bench_source import BenchSource
from bringup.runner.results import StepPlan

__all__ = ["BenchLink", "local_utc_offset"]

_SLOPES = {"positive": "rising", "negative": "falling"}
#: A scope channel's bandwidth limit when switched on: 20 MHz on most scopes (common practice; the
#: notebook shows it as "20 MHz limit").
_LIMIT_HZ = 20e6


def _clipping(net: str, source, volts, offset_v: float, range_v: float) -> str | None:
    """Why a trace is clipped (samples at the top or bottom of the screen), or None."""
    edge = clipping(volts, offset_v, range_v)
    if edge is None:
        return None
    return (
        f"CH{source} ({net}) clipped at the {edge} of its range: widen the range or move the offset"
    )


def local_utc_offset() -> str:
    """This machine's UTC offset now, as "+01:00" (ISO 8601)."""
    import datetime as dt

    offset = dt.datetime.now().astimezone().utcoffset() or dt.timedelta(0)
    minutes = int(offset.total_seconds() // 60)
    sign = "-" if minutes < 0 else "+"
    return f"{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


class SoakClock:
    """Bench time for a soak log, seconds since the soak started.

    On a real bench it is wall time. On a simulated bench the simulator's clock is held
    (scale 0) and stepped by exactly one interval after each wall-clock wait, so the log's
    sampling instants are exact however loaded the host is: with a wall-timed log at a 600x
    speed-up, 20 ms of scheduling delay becomes 12 s of bench time at the wrong instant, which
    bends the fit and leaves a healthy soak "undecided". The pace a person sees is unchanged
    (one interval / scale of wall time per reading; none on an unpaced bench, scale 0);
    ``release`` restores the speed-up.
    """

    def __init__(self, scale: float, sim=None) -> None:
        self._scale = scale
        self._sim = sim
        self._start = time.monotonic()
        self._stepped_s = 0.0

    def elapsed_s(self) -> float:
        """Bench seconds since the soak started."""
        if self._sim is not None:
            return self._stepped_s
        return (time.monotonic() - self._start) * self._scale

    def tick(self, interval_s: float) -> None:
        """One reading interval has been waited for: step a held simulator clock by it."""
        if self._sim is not None:
            self._sim.advance_time(interval_s)
            self._stepped_s += interval_s

    def release(self) -> None:
        """Give the simulator its speed-up back (a no-op on a real bench)."""
        if self._sim is not None:
            sim, self._sim = self._sim, None
            sim.set_time_scale(self._scale)


class BenchLink:
    """An open bench (real or simulated) for one session."""

    def __init__(self, bench, running=None, tmpdir: tempfile.TemporaryDirectory | None = None):
        """Use :meth:`open`."""
        self.bench = bench
        self._running = running  # the in-process simulated bench, if any
        self._tmpdir = tmpdir

    @classmethod
    def open(cls, source: BenchSource, board: Board) -> BenchLink:
        """Open the bench file's instruments, or start a simulated bench for ``board`` on
        127.0.0.1 and open it through its generated bench file."""
        from bringup.instruments.bench import open_bench_file

        if not source.is_simulated:
            return cls(open_bench_file(source.path))
        from bringup.errors import InputError
        from sim_instruments.bench import start_bench

        if source.seed < 0:  # refused here too, before any server is started
            raise InputError(f"--seed {source.seed}: must be a non-negative integer")
        scenario = source.scenario or "healthy"
        try:
            running = start_bench(board.design, scenario, source.seed,
                                  time_scale=source.time_scale)  # fmt: skip
        except ValueError as exc:
            raise InputError(f"--scenario {scenario!r}: {exc}") from None
        tmpdir = tempfile.TemporaryDirectory(prefix="bringup-bench-")
        try:
            path = Path(tmpdir.name) / "sim-bench.toml"
            path.write_text(running.bench_file_text(), encoding="utf-8")
            bench = open_bench_file(path)
        except BaseException:
            running.stop()
            tmpdir.cleanup()
            raise
        return cls(bench, running, tmpdir)

    # ---------------------------------------------------------------- identity
    @property
    def simulated(self) -> bool:
        """True when the bench has the simulation subsystem (the runner may play the hands)."""
        return self.bench.simulation is not None

    def identities(self) -> dict[str, str]:
        """``*IDN?`` of each instrument by role."""
        return dict(self.bench.identities)

    def snapshot(self, source: BenchSource) -> dict:
        """The bench as logged with a new session: ``source.describe()`` (how to reopen it),
        one table per instrument (``resource``, ``profile``, ``calibration_due`` as ISO date or
        null, ``idn``: its ``*IDN?`` answer), the scope's ``channels`` by number (``net``,
        ``probe_ratio``, ``probe`` kind), ``simulation`` for a simulated bench, the file's
        ``text``, and the local
        ``utc_offset`` ("+01:00") of the machine that ran the session."""
        config = self.bench.config
        kinds = self.probe_kinds()
        identities = self.identities()
        out: dict = dict(source.describe())
        for role, entry in config.instruments.items():
            due = entry.calibration_due
            out[role] = {"resource": entry.resource, "profile": entry.profile,
                         "calibration_due": due.isoformat() if due is not None else None,
                         "idn": identities.get(role)}  # fmt: skip
            if entry.calibration_certificate is not None:  # absent: the snapshot as before
                out[role]["calibration_certificate"] = entry.calibration_certificate
        if "scope" in out:
            out["scope"]["channels"] = {
                str(n): {"net": w.net, "probe_ratio": w.probe_ratio, "probe": kinds.get(n)}
                for n, w in sorted(config.channels.items())
            }
        if self.simulated:
            out["simulation"] = {"enabled": True}
        try:
            out["text"] = Path(config.path).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError):
            pass  # the tables above hold what was read from it
        out["utc_offset"] = local_utc_offset()
        return out

    def probe_kinds(self) -> dict[int, str]:
        """The kind of probe on each wired scope channel, as the bench file wires it: a channel
        wired to a floating net (vgs, vbs) carries a differential probe, one wired to a current
        net (i_switch) a current probe."""
        return {n: w.kind for n, w in self.bench.config.channels.items()}

    def time_scale(self) -> float:
        """Bench seconds per wall second: 1 on a real bench, the sim's speed-up otherwise."""
        if self.bench.simulation is None:
            return 1.0
        return float(self.bench.simulation.time_scale())

    def dwell(self, seconds: float, wait: Callable[[float], None]) -> None:
        """Let ``seconds`` of bench time pass (a supply settling before it is read).

        On a real bench that is ``wait(seconds)`` of wall time. On a simulated bench the dwell
        is on the simulator's clock, which is what the simulated physics runs on: its supply
        settles at once and its thermal model follows that clock. A running clock (scale K)
        passes the dwell in ``seconds / K`` of wall time; a clock held at 0 (a run nobody
        paces, ``UNPACED``) is stepped by exactly ``seconds`` with no wall wait at all.
        ``wait`` is the caller's cancellable wait.
        """
        sim = self.bench.simulation
        if sim is None:
            wait(seconds)
            return
        scale = float(sim.time_scale())
        if scale > 0:
            wait(seconds / scale)
        else:
            sim.advance_time(seconds)

    def soak_clock(self, scale: float) -> SoakClock:
        """The clock a soak log is stamped with (see ``SoakClock``)."""
        sim = self.bench.simulation
        if sim is None:
            return SoakClock(scale)
        sim.set_time_scale(0.0)  # held: the soak steps it by each interval
        return SoakClock(scale, sim)

    # ---------------------------------------------------------------- hands (sim)
    def play_hands(self, step: Step, plan: StepPlan) -> None:
        """On a simulated bench, do what the operator would: the PWM switch and duty, the
        probes onto their nets, the meter's leads. Done with the board unpowered."""
        sim = self.bench.simulation
        if sim is None:
            return
        pwm = plan.settings.get("pwm")
        if pwm is not None:
            if pwm["enabled"] and pwm.get("duty") is not None:
                sim.set_duty(float(pwm["duty"]))
            sim.set_pwm(bool(pwm["enabled"]))
        for ch in plan.channels:
            sim.move_probe(ch.channel, ch.net)
        if step.reading is not None:
            sim.move_meter_leads(step.reading.net)

    def note_probes(self, plan: StepPlan) -> None:
        """On a real bench the operator confirmed the probes: note where they now sit."""
        for ch in plan.channels:
            self.bench.note_probe_moved(ch.channel, ch.net)

    # ---------------------------------------------------------------- power
    def energised(
        self, volts: float, current_limit_a: float, ovp_v: float, top_v: float, acknowledged: bool
    ):
        """The instrument layer's safe-state context manager around the supply output: on at
        ``volts`` (V) with ``current_limit_a`` (A) and OVP at ``ovp_v``; ``top_v`` is the
        highest voltage the step will set (its hazard notice is acknowledged or not)."""
        from bringup.instruments.safety import HazardLevel, energised, hazard_for

        notice = hazard_for(top_v)
        level = notice.level if (acknowledged and notice is not None) else HazardLevel.NONE
        return energised(self.bench, volts=volts, current_limit_a=current_limit_a, ovp_v=ovp_v,
                         acknowledged=level)  # fmt: skip

    def make_safe(self, *, interrupting: bool = False) -> str | None:
        """Supply output OFF now, from any thread, confirmed; returns a problem text or None.

        A step's thread may be waiting in an exchange with the supply meanwhile: the
        instrument layer then switches off over a second connection (``make_safe_now``).
        ``interrupting``: called from a signal handler that may have cut an exchange of this
        thread short: start on a fresh connection rather than read that exchange's reply."""
        from bringup.instruments.safety import make_safe_now

        supply = self.bench.supply
        if interrupting:
            supply.session.mark_out_of_sync()
        return make_safe_now(supply)

    @property
    def supply_resource(self) -> str:
        """The supply's VISA resource string (what ties an interrupted step to this bench)."""
        return self.bench.supply.session.resource_name

    @property
    def found_on(self):
        """``FoundOn`` (volts, amps) when the supply output was found ON as the bench opened
        (and switched off); None when it was off."""
        return getattr(self.bench, "found_on", None)

    def take_absorbed(self) -> tuple[str, ...]:
        """Faults a retry or a switch-off got past since the last call, every instrument."""
        taken: list[str] = []
        for session in self.bench.sessions.values():
            taken.extend(session.take_absorbed())
        return tuple(taken)

    # ---------------------------------------------------------------- scope
    def check_scope_offers(self, plan: StepPlan) -> None:
        """``NotOffered`` (before anything is energised) when the step's scope set-up needs an
        operation the scope's profile declares absent."""
        setup = plan.settings.get("scope")
        if setup is None:
            return
        self.bench.scope.check_offers(
            channels=[ch.channel for ch in plan.channels],
            math=bool(setup.get("math")),
            bandwidth_limit=any(ch.bandwidth_limit for ch in plan.channels),
            couplings={ch.coupling.lower() for ch in plan.channels},
        )

    def acquire(self, plan: StepPlan) -> tuple[dict[str, Trace], dict, dict[str, str]]:
        """Set up the scope as planned, take one record, fetch every planned trace.

        Returns traces by net (volts), the raw records by net (``Waveform``: codes + scale) for
        the log, and the nets whose trace clipped (net -> why). A math capture (vgs = gate -
        switch) is fetched from the MATH source."""
        scope = self.bench.scope
        setup = plan.settings["scope"]
        used = {ch.channel for ch in plan.channels}
        for ch in plan.channels:
            scope.configure_channel(ch.channel, range_v=ch.range_v, offset_v=ch.offset_v,
                                    coupling=ch.coupling.lower(),
                                    bandwidth_limit=ch.bandwidth_limit)  # fmt: skip
        for n in scope.channels:
            if n not in used:
                scope.disable_channel(n)
        by_net = {ch.net: ch.channel for ch in plan.channels}
        math_nets = list(setup.get("math") or [])
        if math_nets:
            scope.configure_math_difference(by_net["gate"], by_net["switch"])
        else:
            scope.disable_math()
        scope.configure_timebase(duration_s=setup["duration_s"], points=setup["points"],
                                 start_s=0.0 - setup["pretrigger_s"])  # fmt: skip
        trig = setup.get("trigger")
        if trig is not None:
            net = trig["net"]
            source = by_net.get(net) or by_net.get("gate")
            scope.configure_trigger(source=source, level_v=trig["level_v"],
                                    slope=_SLOPES[trig["slope"]])  # fmt: skip
        scope.acquire()
        traces: dict[str, Trace] = {}
        raw: dict = {}
        clipped: dict[str, str] = {}
        wanted = [(ch.net, ch.channel) for ch in plan.channels] + [(n, "math") for n in math_nets]
        windows = {ch.net: (ch.offset_v, ch.range_v) for ch in plan.channels}
        chains = self._chains(plan, by_net, math_nets)
        accuracy = self._level_accuracy(plan)
        deskew = {ch.net: getattr(self.bench.wiring.get(ch.channel), "deskew_s", 0.0) or 0.0
                  for ch in plan.channels}  # fmt: skip
        for net, source in wanted:
            wf = scope.fetch_waveform(source)
            raw[net] = wf
            volts = wf.volts()
            dc_accuracy_v, tolerance = accuracy.get(net, (0.0, 0.0))
            step_v = abs(wf.y_increment) if wf.codes.dtype.kind in "iu" else 0.0  # float: unknown
            traces[net] = Trace(net, volts, wf.x_increment, wf.x_origin, windows.get(net),
                                chains.get(net, ()), code_step_v=step_v,
                                dc_accuracy_v=dc_accuracy_v, ratio_tolerance=tolerance,
                                deskew_s=deskew.get(net, 0.0))  # fmt: skip
            if net in windows:
                why = _clipping(net, source, volts, *windows[net])
                if why:
                    clipped[net] = why
        return traces, raw, clipped

    def supply_accuracy(self) -> dict[str, tuple[float, float]]:
        """The supply's read-back accuracy by unit ("V", "A"): (fraction of reading, offset),
        as the bench file gives it (absent where it does not)."""
        entry = self.bench.config.instruments.get("supply")
        out: dict[str, tuple[float, float]] = {}
        for unit, name in (("V", "voltage_accuracy"), ("A", "current_accuracy")):
            value = getattr(entry, name, None)
            if value is not None:
                out[unit] = value
        return out

    def _level_accuracy(self, plan: StepPlan) -> dict[str, tuple[float, float]]:
        """Per net of a scope channel: (DC accuracy in V at the channel's range, the probe's
        ratio tolerance as a fraction), from the bench file (0 where it does not say)."""
        entry = self.bench.config.instruments.get("scope")
        fraction = getattr(entry, "dc_accuracy", None) or 0.0
        out: dict[str, tuple[float, float]] = {}
        for ch in plan.channels:
            wiring = self.bench.wiring.get(ch.channel)
            tolerance = getattr(wiring, "probe_ratio_tolerance", None) or 0.0
            out[ch.net] = (fraction * ch.range_v, tolerance)
        return out

    def _chains(self, plan: StepPlan, by_net: dict, math_nets: list) -> dict[str, tuple]:
        """Each net's measuring chain as -3 dB bandwidths (Hz): the scope's and the probe's
        as the bench file gives them, and the channel's bandwidth limit when on (20 MHz). A
        math difference goes through both probes: the slower one counts."""
        entry = self.bench.config.instruments.get("scope")
        scope_bw = getattr(entry, "bandwidth_hz", None)
        probe = {n: w.probe_bandwidth_hz for n, w in self.bench.wiring.items()}
        limited = {ch.net for ch in plan.channels if ch.bandwidth_limit}
        out: dict[str, tuple] = {}
        for ch in plan.channels:
            parts = (scope_bw, probe.get(ch.channel), _LIMIT_HZ if ch.net in limited else None)
            out[ch.net] = tuple(bw for bw in parts if bw is not None)
        for net in math_nets:
            probes = [probe.get(by_net.get(n)) for n in ("gate", "switch")]
            known = [bw for bw in probes if bw is not None]
            parts = (scope_bw, min(known) if known else None)
            out[net] = tuple(bw for bw in parts if bw is not None)
        return out

    # ---------------------------------------------------------------- meters
    def read_meter_volts(self) -> float:
        """DC volts on the meter's leads (V)."""
        return float(self.bench.thermometer.measure_dc_volts())

    def configure_thermometer(self) -> None:
        """Thermocouple input, degrees Celsius."""
        self.bench.thermometer.configure()

    def read_temperature_c(self) -> float:
        """Heatsink temperature (degC)."""
        return float(self.bench.thermometer.read_temperature_c())

    # ---------------------------------------------------------------- closing
    def close(self) -> None:
        """Supply OFF (confirmed), every connection closed, the simulated bench stopped."""
        try:
            self.bench.close()
        finally:
            if self._running is not None:
                self._running.stop()
            if self._tmpdir is not None:
                self._tmpdir.cleanup()
