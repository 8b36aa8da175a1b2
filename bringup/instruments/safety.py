"""The one owner of the supply output: nothing else in ``bringup`` switches it ON or OFF.

``energised(...)`` is a context manager. On entry it puts the supply in a known state (output
OFF, confirmed), sets the over-voltage protection, the over-current protection where the
supply has one, the sensing where the bench file names it, the current limit and the voltage
(in one command where the supply sets them together), reads every one back, and only then
turns the output ON. It turns the output OFF and confirms it
on every way out: the end of the block, an exception (including ``KeyboardInterrupt``), every
terminating signal the platform delivers (``TERMINATING_SIGNALS``: SIGHUP, SIGINT, SIGQUIT,
SIGTERM, SIGPIPE; handlers switch off first, then hand over to the handler that was installed
before, or raise ``KeyboardInterrupt`` / ``SystemExit``), a timeout or lost connection of any
watched instrument, and interpreter exit. A signal the process ignores (``nohup``'s SIGHUP,
Python's SIGPIPE) does not end it and is left alone. A SIGKILL or a power cut cannot be caught
by software: rely on the supply's own protection for those; the next opening of the bench
switches off an output it finds ON and says so (``switch_off_found_on``).

``make_safe_now`` switches off from any thread at once, even while another thread waits in an
exchange with the supply (it then uses a second connection).

Above 60 V DC a hazard notice must be acknowledged before the output goes ON, above 120 V DC
a stronger one (IEC 62368-1 energy classes ES1 <= 60 V DC, ES2 <= 120 V DC [memory]; defer to
local electrical codes and the lab's licensed practice).
"""

from __future__ import annotations

import atexit
import enum
import logging
import signal
import threading
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from types import FrameType
from typing import TYPE_CHECKING, Any, Protocol

from bringup.errors import BringupError, InputError
from bringup.instruments import faults
from bringup.instruments.supply import OCP_MARGIN, Regulation, Supply

if TYPE_CHECKING:
    from bringup.instruments.visa import InstrumentSession

LOG = logging.getLogger(__name__)

#: The signals that end a process by default, by name: each switches the output OFF first.
TERMINATING_SIGNALS = tuple(
    getattr(signal, name)
    for name in ("SIGHUP", "SIGINT", "SIGQUIT", "SIGTERM", "SIGPIPE")
    if hasattr(signal, name)
)
TOUCH_SAFE_LIMIT_V = 60.0
STRONG_WARNING_V = 120.0


class HazardLevel(enum.IntEnum):
    """How hazardous a DC voltage is to touch (see the module doc for the limits)."""

    NONE = 0
    CAUTION = 1  # above 60 V DC
    DANGER = 2  # above 120 V DC


@dataclass(frozen=True)
class HazardNotice:
    """A notice the UI shows before a hazardous voltage is applied; ``text`` is one line."""

    volts: float
    level: HazardLevel
    text: str


def hazard_for(volts: float) -> HazardNotice | None:
    """The notice for applying ``volts`` DC, or ``None`` at or below 60 V."""
    v = abs(volts)
    if v > STRONG_WARNING_V:
        return HazardNotice(
            volts,
            HazardLevel.DANGER,
            f"DANGER: {v:g} V DC is above 120 V DC: lethal shock hazard. Work only as your "
            "local codes and your lab's licensed practice allow; no hands near the board while on.",
        )
    if v > TOUCH_SAFE_LIMIT_V:
        return HazardNotice(
            volts,
            HazardLevel.CAUTION,
            f"CAUTION: {v:g} V DC is above the usual 60 V DC touch-safe limit: shock hazard. "
            "Defer to your local codes; do not touch the board while it is on.",
        )
    return None


#: For the UI to show after every powered step: switching off does not discharge the bus.
STORED_ENERGY_NOTE = (
    "Output off; bus capacitors may stay charged: check they are discharged before touching."
)


class HazardNotAcknowledged(BringupError):
    """The set voltage needs the operator's acknowledgement first; ``notice`` says what to show."""

    def __init__(self, notice: HazardNotice):
        self.notice = notice
        super().__init__(f"{notice.text} (acknowledge {notice.level.name} to go on)")


def make_safe(supply: Supply) -> None:
    """Turn the output OFF and confirm it by reading the state back.

    If the connection misbehaves, reconnect once and try again (switching off is always safe
    to repeat). Errors in the instrument's queue do not stop the confirmation. Raises
    ``ProtectionFault`` if the output cannot be confirmed OFF."""
    session = supply.session
    off = supply.command_text("output", state=supply.profile.word("off"))
    problems: list[str] = []
    with session.lock:
        for attempt in range(2):
            try:
                if attempt:
                    session.reconnect()
                try:
                    supply._switch_output(False)
                except faults.InstrumentError as exc:
                    problems.append(exc.detail)  # an error queued earlier; check the state anyway
                if not supply.output_is_on():
                    for problem in problems:  # got past, not forgotten: the caller logs them
                        session.absorbed.append(f"{session.role}: {problem}; output OFF confirmed")
                    return
                problems.append("output still reports ON")
            except faults.InstrumentFault as exc:
                problems.append(exc.detail)
    raise faults.ProtectionFault(
        session.role, off, "output OFF not confirmed: " + "; ".join(problems)
    )


def make_safe_quietly(supply: Supply) -> str | None:
    """``make_safe`` for last-resort paths: returns the fault message instead of raising."""
    try:
        make_safe(supply)
    except BringupError as exc:
        return str(exc)
    return None


def make_safe_now(supply: Supply, *, wait_s: float = 0.25) -> str | None:
    """Output OFF now, from any thread, confirmed; returns a problem text or None.

    Another thread may be in the middle of an exchange with the supply (a slow reply holds its
    lock for up to the reply's timeout): after ``wait_s`` seconds the output is switched off
    over a second connection to the same resource instead (LAN instruments take several; one
    that refuses leaves the wait for the lock as the last resort)."""
    lock = supply.session.lock
    if lock.acquire(timeout=wait_s):
        try:
            return make_safe_quietly(supply)
        finally:
            lock.release()
    problem = _make_safe_beside(supply)
    if problem is None:
        return None
    with lock:  # the second connection failed: wait for the exchange to end
        return make_safe_quietly(supply)


def _make_safe_beside(supply: Supply) -> str | None:
    """``make_safe`` over a fresh connection of its own; a problem text or None."""
    from bringup.instruments.visa import InstrumentSession

    first = supply.session
    side = InstrumentSession(first.role, first.resource_name, first.profile)
    try:
        side.open()
        make_safe(supply.beside(side))  # the same output: the one feeding the board
        return None
    except BringupError as exc:
        return str(exc)
    finally:
        side.close()


@dataclass(frozen=True)
class FoundOn:
    """The output was found ON when the bench was opened: what it was doing (V, A; None for a
    reading the supply would not give)."""

    volts: float | None
    amps: float | None

    def describe(self) -> str:
        """E.g. "24.0 V, 0.412 A"."""
        v = "? V" if self.volts is None else f"{self.volts:.4g} V"
        a = "? A" if self.amps is None else f"{self.amps:.4g} A"
        return f"{v}, {a}"


def switch_off_found_on(supply: Supply) -> FoundOn | None:
    """On opening a bench: read whether the output is ON and at what voltage and current,
    then switch it OFF, confirmed (``make_safe``: raises ``ProtectionFault`` if it cannot be
    confirmed). Returns what was found ON, or None when it was off. A process stopped by
    SIGKILL or a power cut of the computer (not of the supply) leaves the output as it was."""
    found = None
    try:
        on = supply.output_is_on()
    except faults.InstrumentFault:
        on = False  # unknown: switched off below all the same, and confirmed
    if on:
        readings: list[float | None] = []
        for read in (supply.measure_voltage, supply.measure_current):
            try:
                readings.append(read())
            except faults.InstrumentFault:
                readings.append(None)  # said as unknown, never a made-up number
        found = FoundOn(*readings)
    make_safe(supply)
    return found


class PoweredSupply:
    """The supply while its output is ON, as handed out by ``energised``."""

    def __init__(self, owner: Energised):
        self._owner = owner
        self.supply = owner.supply
        self.notice = owner.notice

    @property
    def switched_off_because(self) -> faults.InstrumentFault | None:
        """The fault of a watched instrument that made the output go OFF early, if any."""
        return self._owner.tripped_by

    @property
    def volts(self) -> float:
        """The voltage setpoint in force, volts."""
        return self._owner.volts

    def set_voltage(self, volts: float) -> None:
        """Change the setpoint while ON (volts); it must stay within OVP and the acknowledged
        hazard level."""
        self._owner.check_voltage(volts)
        self.supply.set_voltage(volts)
        self._owner.volts = volts

    def measure_voltage(self) -> float:
        """Measured output voltage, volts."""
        return self.supply.measure_voltage()

    def measure_current(self) -> float:
        """Measured output current, amperes."""
        return self.supply.measure_current()

    def regulation(self) -> Regulation:
        """CV or CC. A tripped protection, an output found off or an unregulated output is a
        ``ProtectionFault``: the board is no longer powered as the step set it, and a reading
        taken now (0 A, not in current limit) would look like a healthy board."""
        state = self.supply.regulation()
        if state in (Regulation.CONSTANT_VOLTAGE, Regulation.CONSTANT_CURRENT):
            return state
        s = self.supply
        query = "regulation_status" if s.profile.has("regulation_status") else "regulation_mode"
        why = {
            Regulation.OVP_TRIPPED: "OVP tripped",
            Regulation.OCP_TRIPPED: "OCP tripped",
            Regulation.OFF: "output found off",
        }.get(state, "output unregulated")
        raise faults.ProtectionFault(
            s.session.role, s.command_text(query), f"{why} while the step had it on"
        )

    def output_is_on(self) -> bool:
        """Whether the output is on (read back)."""
        return self.supply.output_is_on()


def _close_enough(read: float, wanted: float, rel: float) -> bool:
    return abs(read - wanted) <= max(rel * abs(wanted), 1e-3)


class Energised:
    """Context manager that owns the output: see ``energised``."""

    def __init__(
        self,
        supply: Supply,
        *,
        volts: float,
        current_limit_a: float,
        ovp_v: float,
        ocp_a: float | None = None,
        acknowledged: HazardLevel = HazardLevel.NONE,
        watch: Iterable[InstrumentSession] = (),
        readback_tolerance: float = 0.005,
    ):
        self.supply = supply
        self.volts = float(volts)
        self.current_limit_a = float(current_limit_a)
        self.ovp_v = float(ovp_v)
        # an OCP with a level of its own sits above the limit: CC regulation stays in charge
        self.ocp_a = float(ocp_a) if ocp_a is not None else OCP_MARGIN * self.current_limit_a
        self.acknowledged = HazardLevel(acknowledged)
        self.watch = [s for s in watch if s is not supply.session]
        self.tolerance = readback_tolerance
        self.notice = hazard_for(self.volts)
        self.tripped_by: faults.InstrumentFault | None = None
        self.cleared_trip = False  # True if a latched OVP trip was reset on entry
        self._saved_handlers: dict[int, Any] = {}
        self._off_lock = threading.Lock()

    def check_voltage(self, volts: float) -> None:
        """Refuse a setpoint above the OVP level or above the acknowledged hazard level."""
        if volts < 0:
            raise InputError(f"supply voltage must be >= 0 V, not {volts!r}")
        if volts >= self.ovp_v:
            raise InputError(
                f"supply voltage {volts:g} V must be below the OVP level {self.ovp_v:g} V"
            )
        notice = hazard_for(volts)
        if notice is not None and self.acknowledged < notice.level:
            raise HazardNotAcknowledged(notice)

    # -- entry ---------------------------------------------------------------------------
    def __enter__(self) -> PoweredSupply:
        self.check_voltage(self.volts)
        if self.current_limit_a <= 0:
            raise InputError(f"current limit must be above 0 A, not {self.current_limit_a!r}")
        s = self.supply
        make_safe(s)
        try:
            if s.ovp_tripped():
                s.clear_ovp_trip()
                self.cleared_trip = True
            if s.ocp_tripped():
                s.clear_ocp_trip()
                self.cleared_trip = True
            s.set_ovp(self.ovp_v)
            if s.has_ocp_level:
                s.set_ocp(self.ocp_a)
            if s.has_ovp_switch:  # a level alone protects nothing while the switch is off
                s.enable_ovp(True)
            if s.has_ocp_switch:
                s.enable_ocp(True)
            if s.remote_sense is not None and s.has_sense:
                s.set_sense(s.remote_sense)
            s.set_levels(self.volts, self.current_limit_a)  # output OFF (confirmed above)
            self._read_back(s)
            self._arm_guards()
            if self.notice is not None:  # acknowledged (checked above): still say it, loudly
                LOG.warning("%s (acknowledged: %s)", self.notice.text, self.acknowledged.name)
            s._switch_output(True)  # never retried: a failure here goes straight to OFF
            if not s.output_is_on():
                raise faults.ProtectionFault(
                    s.session.role, s.command_text("output_state"), "output did not turn ON"
                )
        except BaseException:
            self._disarm_guards()
            make_safe_quietly(s)
            raise
        return PoweredSupply(self)

    def _read_back(self, s: Supply) -> None:
        """Every protection and level read back before the output may go ON."""
        role = s.session.role
        checks = [
            ("current_limit", s.current_limit(), self.current_limit_a, "current limit", "A"),
            ("ovp_level", s.ovp_level(), self.ovp_v, "OVP", "V"),
        ]
        if s.has_ocp_level:
            checks.append(("ocp_level", s.ocp_level(), self.ocp_a, "OCP", "A"))
        checks.append(("voltage_setpoint", s.voltage_setpoint(), self.volts, "setpoint", "V"))
        for operation, read, wanted, name, unit in checks:
            if not _close_enough(read, wanted, self.tolerance):
                raise faults.ProtectionFault(
                    role,
                    s.command_text(operation),
                    f"{name} reads {read:g} {unit}, set {wanted:g} {unit}",
                )
        if s.has_ovp_switch and not s.ovp_enabled():
            raise faults.ProtectionFault(role, s.command_text("ovp_enabled"), "OVP did not turn on")
        if s.has_ocp_switch and not s.ocp_enabled():
            raise faults.ProtectionFault(role, s.command_text("ocp_enabled"), "OCP did not turn on")
        if s.remote_sense is not None and s.has_sense and s.sense_is_remote() != s.remote_sense:
            wanted_sense = "remote" if s.remote_sense else "local"
            raise faults.ProtectionFault(
                role, s.command_text("sense_state"), f"sensing is not {wanted_sense}"
            )

    # -- exit ----------------------------------------------------------------------------
    def __exit__(self, exc_type: object, exc: BaseException | None, tb: object) -> None:
        # guards stay armed while switching off: a Ctrl-C now still ends with the output OFF
        try:
            make_safe(self.supply)  # raises ProtectionFault if OFF cannot be confirmed
        finally:
            self._disarm_guards()

    def switch_off_now(self) -> str | None:
        """Turn the output OFF from any thread (guards call this); returns a problem or None."""
        if not self._off_lock.acquire(blocking=False):
            return None  # already switching off (a fault seen while switching off)
        try:
            return make_safe_quietly(self.supply)
        finally:
            self._off_lock.release()

    # -- guards: signals, other instruments, interpreter exit -----------------------------
    def _on_fault(self, fault: faults.InstrumentFault) -> None:
        if isinstance(fault, faults.ConnectionLost | faults.InstrumentTimeout):
            if self.tripped_by is None:
                self.tripped_by = fault
            self.switch_off_now()

    def _on_signal(self, signum: int, frame: FrameType | None) -> None:
        # the signal may have landed in the middle of an exchange with the supply: start the
        # switch-off on a fresh connection rather than read that exchange's reply as our own
        self.supply.session.mark_out_of_sync()
        self.switch_off_now()
        previous = self._saved_handlers.get(signum)
        if callable(previous) and previous is not signal.default_int_handler:
            previous(signum, frame)
            return
        if signum == signal.SIGINT:
            raise KeyboardInterrupt
        raise SystemExit(128 + signum)

    def _arm_guards(self) -> None:
        for session in self.watch:
            session.add_fault_listener(self._on_fault)
        self.supply.session.add_fault_listener(self._on_fault)
        atexit.register(self.switch_off_now)
        if threading.current_thread() is threading.main_thread():
            for signum in TERMINATING_SIGNALS:
                if signal.getsignal(signum) is signal.SIG_IGN:
                    continue  # the process ignores it (nohup, Python's SIGPIPE): it ends nothing
                self._saved_handlers[signum] = signal.signal(signum, self._on_signal)

    def _disarm_guards(self) -> None:
        for signum, previous in self._saved_handlers.items():
            signal.signal(signum, previous if previous is not None else signal.SIG_DFL)
        self._saved_handlers.clear()
        atexit.unregister(self.switch_off_now)
        for session in (*self.watch, self.supply.session):
            session.remove_fault_listener(self._on_fault)


class SupplyWithCompany(Protocol):
    """What ``energised`` needs of an open bench: its supply and every instrument's session
    (``bringup.instruments.bench.Bench`` is one). Declared here so that the safe-state owner
    does not import the bench module that imports it."""

    supply: Supply
    sessions: Mapping[str, InstrumentSession]


def energised(
    target: SupplyWithCompany | Supply,
    *,
    volts: float,
    current_limit_a: float,
    ovp_v: float,
    ocp_a: float | None = None,
    acknowledged: HazardLevel = HazardLevel.NONE,
    readback_tolerance: float = 0.005,
) -> Energised:
    """``with energised(bench, volts=24, current_limit_a=2, ovp_v=27) as powered: ...``

    ``target`` is a ``Bench`` (every other instrument of it is watched: its timeout or lost
    connection switches the output off at once) or a bare ``Supply``. ``volts`` is the
    setpoint (V), ``current_limit_a`` the current limit (A), ``ovp_v`` the over-voltage trip
    (V, above ``volts``). Where the supply has an over-current protection it is armed too:
    with a level of its own at ``ocp_a`` (A; default 10 % above the current limit, a backstop
    behind constant-current regulation), with only an on/off switch it is switched on (such a
    supply then trips at the current limit instead of regulating). Remote sense is set as the
    bench file says, where the supply can switch it. Above 60 V DC raises ``HazardNotAcknowledged`` (with the notice to
    show) unless ``acknowledged`` is at least the notice's level. Read-backs must agree within
    ``readback_tolerance`` (relative, at least 1 mV / 1 mA)."""
    if isinstance(target, Supply):
        supply, watch = target, []
    else:
        supply, watch = target.supply, list(target.sessions.values())
    return Energised(
        supply,
        volts=volts,
        current_limit_a=current_limit_a,
        ovp_v=ovp_v,
        ocp_a=ocp_a,
        acknowledged=acknowledged,
        watch=watch,
        readback_tolerance=readback_tolerance,
    )
