"""The bench file: which resource is which instrument, which profile drives it, and which
scope channel sees which net. ``load_bench`` validates it; ``open_bench`` connects.

```toml
[scope]
resource = "TCPIP::192.168.1.20::5025::SOCKET"
profile = "sim-scope"
calibration_due = 2027-03-31        # optional, a TOML date (flagged when missing or past)
calibration_certificate = "CAL-2026-0412"  # optional, the calibration certificate's reference

bandwidth_hz = 350e6                # optional: its -3 dB bandwidth (rise times lose 0.35/BW)
dc_accuracy = 0.02                  # optional: DC vertical accuracy, a fraction of full scale

[scope.channels.1]
net = "gate"                        # gate, switch, vgs, vbs, bus, vdrv, logic, vgs_low, i_switch
probe_ratio = 10                    # a current net (i_switch): the current probe's A/V
probe_bandwidth_hz = 500e6          # optional: the probe's -3 dB bandwidth
probe_ratio_tolerance = 0.01        # optional: the probe's attenuation tolerance, a fraction
deskew_s = 7e-9                     # optional: how far this channel lags the voltage probes (s),
                                    # measured on a resistive step; taken out before v * i

[supply]
resource = "TCPIP::192.168.1.21::5025::SOCKET"
profile = "sim-supply"
channel = 2                         # the output feeding the board (multi-channel supplies)
remote_sense = false                # sense leads wired to the board? (where it can be set)
voltage_accuracy = [0.0005, 0.010]  # optional: read-back +/-(fraction of reading + volts)
current_accuracy = [0.001, 0.002]   # optional: read-back +/-(fraction of reading + amperes)

[thermometer]
resource = "TCPIP::192.168.1.22::5025::SOCKET"
profile = "sim-thermometer"
channel = 1                         # the input the heatsink thermocouple is on
thermocouple = "K"                  # its type (B, E, J, K, N, R, S, T)

[simulation]                        # only for the simulated bench
enabled = true
```
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from bringup.errors import ConfigError, InputError
from bringup.tomlfile import TomlDocument, read_toml

if TYPE_CHECKING:
    from bringup.instruments.profiles import Profile
    from bringup.instruments.scope import Scope
    from bringup.instruments.scpi_log import ScpiLog
    from bringup.instruments.simulator_client import SimulationControl
    from bringup.instruments.supply import Supply
    from bringup.instruments.thermometer import Thermometer
    from bringup.instruments.visa import InstrumentSession

ROLES = ("scope", "supply", "thermometer")
MAX_CHANNELS = 8  # the most any scope profile declares; each profile says its own count
NETS = ("gate", "switch", "vgs", "vbs", "bus", "vdrv", "logic", "vgs_low", "i_switch")
#: Nets that carry a current (amperes at the tip): a current probe, its ratio in A/V.
CURRENT_NETS = ("i_switch",)
#: Largest deskew a bench file may give a channel, s (a probe's delay is nanoseconds).
MAX_DESKEW_S = 1e-6
_RESOURCE = re.compile(
    r"^(TCPIP\d*::[^:\s]+::\d{1,5}::SOCKET|TCPIP\d*::[^:\s]+(::[^:\s]+)?::INSTR"
    r"|USB\d*::[^\s]+::INSTR|GPIB\d*::\d+(::\d+)?::INSTR|ASRL[^\s]+::INSTR)$",
    re.IGNORECASE,
)
_ROLE_KEYS = {
    "scope": {"channels", "bandwidth_hz", "dc_accuracy"},
    "supply": {"channel", "remote_sense", "voltage_accuracy", "current_accuracy"},
    "thermometer": {"channel", "thermocouple"},
}
THERMOCOUPLES = ("B", "E", "J", "K", "N", "R", "S", "T")
_LOOPBACK = re.compile(r"^TCPIP\d*::127\.0\.0\.1::\d{1,5}::SOCKET$", re.IGNORECASE)


@dataclass(frozen=True)
class InstrumentEntry:
    """One instrument of the bench file."""

    role: str
    resource: str
    profile: str
    calibration_due: dt.date | None = None
    channel: int | str | None = None  # None: the bench file does not name one
    remote_sense: bool | None = None  # supply only
    thermocouple: str = "K"  # thermometer only
    bandwidth_hz: float | None = None  # scope only: its -3 dB bandwidth, when given
    # scope only: DC vertical accuracy as a fraction of full scale (its datasheet), when given
    dc_accuracy: float | None = None
    # supply only: read-back accuracy +/-(fraction of reading + offset in V or A), when given
    voltage_accuracy: tuple[float, float] | None = None
    current_accuracy: tuple[float, float] | None = None
    calibration_certificate: str | None = None  # the certificate's reference, when given

    def calibration_overdue(self, today: dt.date) -> bool:
        """Whether the calibration due date has passed on ``today``."""
        return self.calibration_due is not None and today > self.calibration_due


@dataclass(frozen=True)
class ChannelWiring:
    """Which net a scope channel's probe sits on, and the probe's attenuation ratio."""

    channel: int
    net: str
    probe_ratio: float
    probe_bandwidth_hz: float | None = None  # the probe's -3 dB bandwidth, when given
    probe_ratio_tolerance: float | None = None  # its attenuation tolerance (fraction), when given
    #: how far this channel's record lags the voltage probes' (s), measured at the bench on a
    #: resistive step (voltage and current rise together there); 0 when the file does not say
    deskew_s: float = 0.0

    @property
    def kind(self) -> str:
        """The probe this wiring implies: "current" on a current net, "differential" on a
        floating one (vgs, vbs), else "single-ended"."""
        if self.net in CURRENT_NETS:
            return "current"
        return "differential" if self.net in ("vgs", "vbs") else "single-ended"


@dataclass(frozen=True)
class BenchConfig:
    """A validated bench file."""

    path: Path
    instruments: Mapping[str, InstrumentEntry]
    channels: Mapping[int, ChannelWiring]
    simulated: bool = False

    def channel_for(self, net: str) -> int:
        """The scope channel wired to ``net``; ``InputError`` if no channel is."""
        for wiring in self.channels.values():
            if wiring.net == net:
                return wiring.channel
        raise InputError(
            f"{self.path}: no scope channel sees net {net!r} (see [scope.channels.<n>])"
        )


def _entry(src: TomlDocument, role: str, simulated: bool) -> InstrumentEntry:
    table = src.data.get(role)
    if table is None:
        raise src.error((role,), f"missing table [{role}]")
    if not isinstance(table, dict):
        raise src.error((role,), f"must be a table [{role}]")
    allowed = {"resource", "profile", "calibration_due", "calibration_certificate"}
    allowed |= _ROLE_KEYS[role]
    for key in table:
        if key not in allowed:
            raise src.error((role, key), f"unknown key (expected {', '.join(sorted(allowed))})")
    for key in ("resource", "profile"):
        if key not in table:
            raise src.error((role, key), "missing")
        if not isinstance(table[key], str) or not table[key].strip():
            raise src.error((role, key), f"must be a non-empty string, not {table[key]!r}")
    resource = table["resource"].strip()
    if not _RESOURCE.match(resource):
        raise src.error(
            (role, "resource"),
            f"{resource!r} is not an explicit VISA resource string (e.g. TCPIP::host::5025::SOCKET)",
        )
    if simulated and not _LOOPBACK.match(resource):
        raise src.error(
            (role, "resource"),
            f"{resource!r}: a simulated bench is served on TCPIP::127.0.0.1::<port>::SOCKET",
        )
    due = table.get("calibration_due")
    if due is not None:
        if isinstance(due, str):
            try:
                due = dt.date.fromisoformat(due)
            except ValueError:
                raise src.error(
                    (role, "calibration_due"), f"{due!r} is not a date YYYY-MM-DD"
                ) from None
        elif isinstance(due, dt.datetime) or not isinstance(due, dt.date):
            raise src.error((role, "calibration_due"), f"must be a date YYYY-MM-DD, not {due!r}")
    channel = table.get("channel")
    if channel is not None:
        bad = isinstance(channel, bool) or not isinstance(channel, int | str)
        if bad or (isinstance(channel, str) and not channel.strip()):
            raise src.error((role, "channel"), f"must be a channel number or name, not {channel!r}")
        channel = channel.strip() if isinstance(channel, str) else channel
    sense = table.get("remote_sense")
    if sense is not None and not isinstance(sense, bool):
        raise src.error((role, "remote_sense"), f"must be true or false, not {sense!r}")
    tc = table.get("thermocouple", "K")
    if not isinstance(tc, str) or tc.strip().upper() not in THERMOCOUPLES:
        raise src.error(
            (role, "thermocouple"),
            f"{tc!r} is not a thermocouple type ({', '.join(THERMOCOUPLES)})",
        )
    bandwidth = _bandwidth(src, (role, "bandwidth_hz"), table.get("bandwidth_hz"))
    accuracy = _fraction(src, (role, "dc_accuracy"), table.get("dc_accuracy"))
    volts = _readback(src, (role, "voltage_accuracy"), table.get("voltage_accuracy"), "V")
    amps = _readback(src, (role, "current_accuracy"), table.get("current_accuracy"), "A")
    return InstrumentEntry(role, resource, table["profile"].strip(), due, channel, sense,
                           tc.strip().upper(), bandwidth, accuracy, volts, amps,
                           _certificate(src, role, table))  # fmt: skip


def _readback(
    src: TomlDocument, where: tuple[str, ...], value: Any, unit: str
) -> tuple[float, float] | None:
    """An optional read-back accuracy from the supply's datasheet, +/-(fraction of reading +
    offset): a fraction alone (0.0005), or [fraction, offset in ``unit``]; it enters the GUM
    budget of every read-back the checklist judges (the bus, the first-power ramp)."""
    if value is None:
        return None
    pair = value if isinstance(value, list) else [value, 0.0]
    ok = len(pair) == 2 and all(
        isinstance(v, int | float) and not isinstance(v, bool) and v >= 0 for v in pair
    )
    if not ok or pair[0] > 0.5:
        raise src.error(where, f"must be a fraction of the reading (0 to 0.5), or [fraction, "
                               f"offset in {unit}] with neither negative, not {value!r}")  # fmt: skip
    return float(pair[0]), float(pair[1])


def _certificate(src: TomlDocument, role: str, table: dict) -> str | None:
    """The optional calibration certificate reference: one line of text."""
    value = table.get("calibration_certificate")
    if value is None:
        return None
    if not isinstance(value, str) or not value.strip() or "\n" in value or "\r" in value:
        raise src.error(
            (role, "calibration_certificate"),
            f"must be the certificate's reference, one line of text, not {value!r}",
        )
    return value.strip()


def calibration_notices(config: BenchConfig, today: dt.date) -> list[str]:
    """One line per instrument of a real bench whose calibration is past due on ``today`` or
    has no due date in the bench file: said before the first step, logged in the record."""
    if config.simulated:
        return []  # a simulated instrument has nothing to calibrate
    notes = []
    for role, entry in config.instruments.items():
        cert = (
            f", certificate {entry.calibration_certificate}"
            if entry.calibration_certificate
            else ""
        )
        if entry.calibration_due is None:
            notes.append(
                f"calibration: the {role} has no calibration due date in {config.path}{cert}; "
                "its readings are not shown to be calibrated"
            )
        elif entry.calibration_overdue(today):
            notes.append(
                f"calibration: the {role} is PAST DUE (due {entry.calibration_due.isoformat()}"
                f"{cert}) on {today.isoformat()}; its readings are outside its calibration"
            )
    return notes


def _fraction(src: TomlDocument, where: tuple[str, ...], value: Any) -> float | None:
    """An optional accuracy or tolerance as a fraction: 0 to 0.5 (0.02 = 2 %), from a
    datasheet; it enters the GUM budget of the levels the channel reads."""
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int | float) or not 0 <= value <= 0.5:
        raise src.error(where, f"must be a fraction from 0 to 0.5 (0.02 = 2 %), not {value!r}")
    return float(value)


def _bandwidth(src: TomlDocument, where: tuple[str, ...], value: Any) -> float | None:
    """An optional -3 dB bandwidth in Hz: a number above 0 up to 1e12 (the measuring chain's
    own rise time, 0.35/BW, is taken out of measured edges)."""
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int | float) or not 0 < value <= 1e12:
        raise src.error(where, f"must be a bandwidth in Hz above 0 (e.g. 350e6), not {value!r}")
    return float(value)


def _deskew(src: TomlDocument, where: tuple[str, ...], value: Any) -> float:
    """An optional channel deskew in seconds (default 0), at most ``MAX_DESKEW_S`` either way."""
    if value is None:
        return 0.0
    if (
        isinstance(value, bool)
        or not isinstance(value, int | float)
        or not (abs(value) <= MAX_DESKEW_S)
    ):
        raise src.error(
            where, f"must be a time in seconds within +/- 1e-6 (e.g. 7e-9), not {value!r}"
        )
    return float(value)


def _channels(src: TomlDocument) -> dict[int, ChannelWiring]:
    raw = src.data.get("scope", {}).get("channels", {})
    if not isinstance(raw, dict):
        raise src.error(("scope", "channels"), "must be tables [scope.channels.<n>]")
    out: dict[int, ChannelWiring] = {}
    seen: dict[str, int] = {}
    for key, table in raw.items():
        where = ("scope", "channels", key)
        if key not in tuple(str(n) for n in range(1, MAX_CHANNELS + 1)):
            raise ConfigError(
                src.path,
                f"scope.channels.{key}",
                f"channel must be 1 to {MAX_CHANNELS}",
                src.line_of(*where),
            )
        if not isinstance(table, dict):
            raise ConfigError(
                src.path, f"scope.channels.{key}", "must be a table", src.line_of(*where)
            )
        for item in table:
            if item not in ("net", "probe_ratio", "probe_bandwidth_hz", "probe_ratio_tolerance",
                            "deskew_s"):  # fmt: skip
                raise src.error(
                    (*where, item),
                    "unknown key (expected net, probe_ratio, probe_bandwidth_hz, "
                    "probe_ratio_tolerance, deskew_s)",
                )
        net = table.get("net")
        if net is None:
            raise src.error((*where, "net"), "missing")
        if net not in NETS:
            raise src.error((*where, "net"), f"{net!r} is not one of {', '.join(NETS)}")
        if net in seen:
            raise src.error((*where, "net"), f"{net!r} is already on channel {seen[net]}")
        ratio = table.get("probe_ratio")
        if ratio is None:
            raise src.error(
                (*where, "probe_ratio"), "missing (1 for a direct cable, 10 for a 10:1 probe)"
            )
        if isinstance(ratio, bool) or not isinstance(ratio, int | float) or not 0 < ratio <= 10000:
            raise src.error(
                (*where, "probe_ratio"), f"must be a number above 0 (up to 10000), not {ratio!r}"
            )
        seen[net] = int(key)
        probe_bw = _bandwidth(src, (*where, "probe_bandwidth_hz"), table.get("probe_bandwidth_hz"))
        tolerance = _fraction(src, (*where, "probe_ratio_tolerance"),
                              table.get("probe_ratio_tolerance"))  # fmt: skip
        deskew = _deskew(src, (*where, "deskew_s"), table.get("deskew_s"))
        out[int(key)] = ChannelWiring(int(key), net, float(ratio), probe_bw, tolerance, deskew)
    return dict(sorted(out.items()))


def load_bench(path: Path | str) -> BenchConfig:
    """Read and validate a bench file; ``ConfigError`` names the file, key and line."""
    src = read_toml(Path(path))
    for key in src.data:
        if key not in (*ROLES, "simulation"):
            raise src.error(
                (key,), "unknown table (expected scope, supply, thermometer, simulation)"
            )
    sim = src.data.get("simulation", {})
    if not isinstance(sim, dict):
        raise src.error(("simulation",), "must be a table [simulation]")
    for key in sim:
        if key != "enabled":
            raise src.error(("simulation", key), "unknown key (expected enabled)")
    enabled = sim.get("enabled", False)
    if not isinstance(enabled, bool):
        raise src.error(("simulation", "enabled"), f"must be true or false, not {enabled!r}")
    instruments = {role: _entry(src, role, enabled) for role in ROLES}
    return BenchConfig(src.path, instruments, _channels(src), enabled)


@dataclass
class Bench:
    """An open bench (use as a context manager, or call ``close``).

    ``identities`` holds each instrument's ``*IDN?`` answer by role; ``profiles`` the profile
    driving it; ``simulation`` the sim's control subsystem, only on a simulated bench.
    """

    config: BenchConfig
    scope: Scope
    supply: Supply
    thermometer: Thermometer
    identities: dict[str, str]
    profiles: dict[str, Profile]
    sessions: dict[str, InstrumentSession]
    wiring: dict[int, ChannelWiring] = field(default_factory=dict)
    simulation: SimulationControl | None = None
    #: this process's locks on the instruments' resources (``bringup.locks``), let go on close
    resource_locks: Any = None
    #: What the supply was doing when the bench was opened, if its output was found ON
    #: (``bringup.instruments.safety.FoundOn``: volts, amps); None when it was off.
    found_on: Any = None

    def channel_for(self, net: str) -> int:
        """The scope channel whose probe sits on ``net`` now (``InputError`` if none)."""
        for wiring in self.wiring.values():
            if wiring.net == net:
                return wiring.channel
        raise InputError(f"no scope channel sees net {net!r} on this bench")

    def note_probe_moved(self, channel: int, net: str) -> None:
        """Record that the probe of ``channel`` now sits on ``net`` (the operator moved it)."""
        if net not in NETS:
            raise InputError(f"unknown net {net!r}: one of {', '.join(NETS)}")
        old = self.wiring.get(channel)
        for ch, w in list(self.wiring.items()):
            if w.net == net and ch != channel:
                del self.wiring[ch]  # a net is on one channel at a time
        self.wiring[channel] = ChannelWiring(channel, net, old.probe_ratio if old else 1.0,
                                             old.probe_bandwidth_hz if old else None,
                                             old.probe_ratio_tolerance if old else None,
                                             old.deskew_s if old else 0.0)  # fmt: skip

    def close(self) -> None:
        """Make the supply safe (output OFF, confirmed) and close every connection; a second
        call does nothing."""
        from bringup.instruments.safety import make_safe

        if all(session.closed for session in self.sessions.values()):
            return
        try:
            make_safe(self.supply)
        finally:
            try:
                for session in self.sessions.values():
                    session.close()
            finally:
                if self.resource_locks is not None:
                    self.resource_locks.release()

    def __enter__(self) -> Bench:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def profile_for_role(config: BenchConfig, role: str, profiles_dir: Path | None) -> Profile:
    from bringup.instruments.profiles import find_profile

    entry = config.instruments[role]
    try:
        profile = find_profile(entry.profile, profiles_dir)
    except ConfigError as exc:
        if exc.path == entry.profile:  # not found: say where it was asked for
            src = read_toml(config.path)
            raise src.error(
                (role, "profile"),
                exc.problem.replace("no profile of that name", f"no profile {entry.profile!r}"),
            ) from None
        raise
    if profile.kind != role:
        src = read_toml(config.path)
        raise src.error(
            (role, "profile"), f"{entry.profile!r} is a {profile.kind} profile, not a {role} one"
        )
    _check_channel(config, entry, profile)
    return profile


def _check_channel(config: BenchConfig, entry: InstrumentEntry, profile: Profile) -> None:
    """The bench file's ``channel`` must be one the profile knows; a profile with several
    channels needs it named (feeding the board from a guessed output is not safe)."""
    channels = profile.channels
    if entry.role == "scope":
        for n in config.channels:
            if n > profile.channel_count:
                raise read_toml(config.path).error(
                    ("scope", "channels", str(n)),
                    f"profile {profile.name!r} has {profile.channel_count} channels",
                )
        return
    problem = None
    if entry.channel is None:
        if channels is not None and channels.count > 1:
            problem = (
                f"missing: profile {profile.name!r} has {channels.count} channels "
                f"({channels.describe()}); name the one {_FEEDS[entry.role]}"
            )
    elif channels is None:
        if entry.channel != 1:
            problem = f"{entry.channel!r}: profile {profile.name!r} has one channel"
    elif not channels.accepts(entry.channel):
        problem = (
            f"{entry.channel!r} is not a channel of profile {profile.name!r} "
            f"({channels.describe()})"
        )
    if entry.role == "supply" and entry.remote_sense and not profile.has("sense"):
        src = read_toml(config.path)
        raise src.error(
            ("supply", "remote_sense"),
            f"profile {profile.name!r} cannot switch remote sense (set it on the instrument "
            "and leave this key out)",
        )
    if problem:
        raise read_toml(config.path).error((entry.role, "channel"), problem)


_FEEDS = {"supply": "feeding the board", "thermometer": "the heatsink thermocouple is on"}


def open_bench(
    config: BenchConfig,
    *,
    profiles_dir: Path | None = None,
    make_safe_on_open: bool = True,
    fast_reads: bool = True,
    scpi_log: ScpiLog | None = None,
) -> Bench:
    """Connect every instrument of ``config``, check each ``*IDN?`` against its profile, clear
    the error queues, set the probe ratios of the wired channels and (by default) make the
    supply safe: output OFF, confirmed. On a simulated bench the sim's probes are placed as
    the bench file wires them. ``scpi_log`` records every line each instrument is sent and
    answers. Any failure closes what was opened."""
    from bringup.instruments.scope import Scope
    from bringup.instruments.thermometer import Thermometer
    from bringup.instruments.visa import InstrumentSession
    from bringup.locks import lock_resources

    profiles = {role: profile_for_role(config, role, profiles_dir) for role in ROLES}
    # One bench, one process: every resource is locked before a byte is sent (InUse names
    # the holder); the locks go with the bench's close, or with this process.
    locks = lock_resources((role, config.instruments[role].resource) for role in ROLES)
    sessions: dict[str, InstrumentSession] = {}
    try:
        identities = {}
        for role in ROLES:
            session = InstrumentSession(
                role, config.instruments[role].resource, profiles[role], fast_reads=fast_reads
            )
            if scpi_log is not None:
                session.scpi_log = scpi_log
            session.open()
            sessions[role] = session
            identities[role] = session.identify()
            if profiles[role].has("prepare"):
                session.configure("prepare")
            for line in profiles[role].lines("clear_status"):
                session.write(line)
                session.check_errors(line)
        bench = Bench(
            config=config,
            scope=Scope(sessions["scope"]),
            supply=_supply(sessions["supply"], config),
            thermometer=Thermometer(
                sessions["thermometer"],
                channel=config.instruments["thermometer"].channel or 1,
                thermocouple=config.instruments["thermometer"].thermocouple,
            ),
            identities=identities,
            profiles=profiles,
            sessions=sessions,
            wiring=dict(config.channels),
            resource_locks=locks,
        )
        if make_safe_on_open:
            from bringup.instruments.safety import switch_off_found_on

            # an output left ON (a process killed mid-step, a host that lost power) is said,
            # not switched off in silence: the caller reports ``found_on`` and logs it
            bench.found_on = switch_off_found_on(bench.supply)
        for wiring in config.channels.values():
            bench.scope.set_probe_ratio(wiring.channel, wiring.probe_ratio)
        if config.simulated:
            from bringup.instruments.simulator_client import SimulationControl

            bench.simulation = SimulationControl(
                sessions["scope"], sessions["thermometer"], NETS, bench.note_probe_moved
            )
            for wiring in config.channels.values():
                bench.simulation.move_probe(wiring.channel, wiring.net, wiring.kind)
        return bench
    except BaseException:
        if "supply" in sessions and make_safe_on_open:
            from bringup.instruments.safety import make_safe_quietly

            make_safe_quietly(_supply(sessions["supply"], config))
        for session in sessions.values():
            session.close()
        locks.release()
        raise


def _supply(session: InstrumentSession, config: BenchConfig) -> Supply:
    """The driver of the bench file's supply channel."""
    from bringup.instruments.supply import Supply

    entry = config.instruments["supply"]
    return Supply(session, channel=entry.channel or 1, remote_sense=entry.remote_sense)


def open_bench_file(path: Path | str, **options: Any) -> Bench:
    """``open_bench(load_bench(path), **options)``."""
    return open_bench(load_bench(path), **options)
