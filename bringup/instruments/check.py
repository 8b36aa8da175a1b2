"""``bringup instruments --check``: try every operation a profile declares, without energising.

For each instrument of a bench file: ``*IDN?`` against the profile's pattern, the error queue
read until empty, then each operation of the profile sent once, and a row per operation saying
whether it works, is declared absent, failed (with the SCPI line sent and the reply or error)
or was not tried (and why). Nothing here can switch the supply on:

- the supply's only ``output`` line sent is the profile's OFF word; with the output found ON
  nothing that sets anything is sent (the board is powered: it is left as found);
- every setting of the supply is first read and then written back with the value it read
  (the voltage setpoint, the limit, OVP and OCP levels, the OCP switch, the sensing), so the
  set commands are exercised without changing what the supply will do; a latched trip is
  reported and left latched;
- the scope and the meter cannot energise anything; they are set up as a short capture and a
  reading would set them (their settings change, as a run would change them).

The checks talk through the same sessions, profiles and drivers as a run.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import asdict, dataclass
from typing import Any

from bringup.errors import BringupError
from bringup.instruments import faults
from bringup.instruments.profiles import OPERATIONS, OPTIONAL, REPLY_MEANINGS, Profile
from bringup.instruments.scope import Scope
from bringup.instruments.visa import InstrumentSession

WORKS, ABSENT, FAILED, NOT_TRIED = "works", "absent", "failed", "not tried"


@dataclass
class CheckRow:
    """One operation's outcome: ``sent`` the SCPI line, ``reply`` the reply (queries) or the
    instrument's error, ``note`` why an operation was not tried or what a reply meant."""

    role: str
    operation: str
    status: str
    sent: str | None = None
    reply: str | None = None
    note: str = ""

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


class _Runner:
    """Sends operations of one session and records a row for each."""

    def __init__(self, role: str, session: InstrumentSession, fields: dict[str, Any]):
        self.role = role
        self.session = session
        self.profile: Profile = session.profile
        self.fields = fields
        self.rows: list[CheckRow] = []
        self.done: set[str] = set()

    def row(self, operation: str, status: str, sent=None, reply=None, note="") -> CheckRow:
        row = CheckRow(self.role, operation, status, sent, reply, note)
        self.rows.append(row)
        self.done.add(operation)
        return row

    def text(self, operation: str, **fields: Any) -> str | None:
        try:
            return self.profile.command(operation, **{**self.fields, **fields})
        except (KeyError, IndexError, ValueError):
            return None

    def skip_absent(self, operation: str) -> bool:
        if operation in self.profile.absent:
            self.row(operation, ABSENT, note="declared absent in [profile] absent")
            return True
        if not self.profile.has(operation):
            self.done.add(operation)
            return True
        return False

    def command(self, operation: str, before: Callable[[], None] | None = None, **fields) -> bool:
        """Send a command operation (then drain the error queue); True if it worked."""
        if operation in self.done or self.skip_absent(operation):
            return False
        sent = self.text(operation, **fields)
        try:
            with self.session.lock:
                if before is not None:
                    before()
                self.session.configure(operation, **{**self.fields, **fields})
        except faults.InstrumentError as exc:
            self.row(operation, FAILED, sent, f"{exc.code},{exc.text!r}")
            return False
        except BringupError as exc:
            self.row(operation, FAILED, sent, str(exc))
            return False
        self.row(operation, WORKS, sent)
        return True

    def query(
        self, operation: str, before: Callable[[], None] | None = None, **fields: Any
    ) -> tuple[bool, Any]:
        """Send a query operation and read its reply as the profile describes it: a number,
        a word the profile maps, or (identify, error queue) text."""
        if operation in self.done or self.skip_absent(operation):
            return False, None
        sent = self.text(operation, **fields)
        reply = None
        try:
            with self.session.lock:
                if before is not None:
                    before()
                reply = self.session.ask(operation, **{**self.fields, **fields})
                meaning = self._meaning(operation, sent or operation, reply)
                self.session.check_errors(sent)
        except faults.InstrumentError as exc:
            self.row(operation, FAILED, sent, f"{exc.code},{exc.text!r}" + _got(reply))
            return False, None
        except BringupError as exc:
            self.row(operation, FAILED, sent, reply, str(exc))
            return False, None
        note = "" if meaning is None or isinstance(meaning, float) else f"means {meaning!r}"
        self.row(operation, WORKS, sent, reply, note)
        return True, meaning

    def _meaning(self, operation: str, sent: str, reply: str) -> Any:
        if operation in ("identify", "error_query", "waveform_preamble"):
            return None
        if operation in REPLY_MEANINGS.get(self.profile.kind, {}):
            meaning = self.profile.reply_meaning(operation, reply)
            if meaning is None:
                raise self.session.not_described(
                    sent, f"replies.{operation}", reply, "a word the profile maps"
                )
            return meaning
        text = self.profile.numbers.number_text(reply)
        return self.session._number(sent, text if text is not None else reply, reply, operation)


def _got(reply: str | None) -> str:
    return f" (replied {reply!r})" if reply is not None else ""


def _start(role: str, session: InstrumentSession, runner: _Runner) -> bool:
    """Identity and error queue; False when the instrument is not the profile's."""
    ok, _ = runner.query("identify")
    if not ok:
        return False
    identity = runner.rows[-1].reply or ""
    if not runner.profile.matches(identity):
        runner.rows[-1].status = FAILED
        runner.rows[
            -1
        ].note = f"does not match the profile's pattern {runner.profile.identity.pattern!r}"
        return False
    query = runner.text("error_query")
    try:
        session.check_errors(None)
        runner.row("error_query", WORKS, query, None, "queue empty")
    except faults.InstrumentError as exc:
        runner.row("error_query", WORKS, query, f"{exc.code},{exc.text!r}", "an error was queued")
    except BringupError as exc:
        runner.row("error_query", FAILED, query, None, str(exc))
    runner.command("clear_status")
    runner.query("operation_complete")
    return True


_SUPPLY_READS = (
    "voltage_setpoint",
    "current_limit",
    "ovp_level",
    "ovp_tripped",
    "ocp_level",
    "ovp_enabled",
    "ocp_enabled",
    "ocp_tripped",
    "sense_state",
    "measure_voltage",
    "measure_current",
    "regulation_status",
    "regulation_mode",
)


def check_supply(session: InstrumentSession, supply: Any) -> list[CheckRow]:
    """Rows for the supply reached through ``supply`` (a ``Supply`` driver on ``session``)."""
    from bringup.instruments.supply import Supply

    assert isinstance(supply, Supply)
    runner = _Runner("supply", session, supply._fields())
    if not _start("supply", session, runner):
        return runner.rows
    select = supply._select if session.profile.has("select_channel") else None
    if session.profile.has("select_channel"):
        runner.command("select_channel")
    ok, on = runner.query("output_state", select)
    why = ""
    if not ok or on:
        why = "the output is ON: the board is powered, left as found" if on else ""
        why = why or "the output state could not be read: nothing is set"
    readings: dict[str, Any] = {}
    for operation in _SUPPLY_READS:
        ok, value = runner.query(operation, select)
        if ok:
            readings[operation] = value
    for operation, values, needs in _supply_writes(session.profile, readings):
        if operation in runner.done or runner.skip_absent(operation):
            continue
        if why:  # found ON: not even OFF is sent (someone powered the board on purpose)
            runner.row(operation, NOT_TRIED, runner.text(operation, **_safe(values)), note=why)
            continue
        missing = [n for n in needs if n not in readings]
        if missing:
            runner.row(operation, NOT_TRIED, note=f"{missing[0]} could not be read back first")
            continue
        if operation.endswith("_clear") and readings[needs[0]]:
            runner.row(operation, NOT_TRIED, note="tripped: left latched (clear it by hand)")
            continue
        runner.command(operation, select, **values)
    if not on:
        _confirm_off(runner, supply)
    _rest(runner)
    return runner.rows


def _supply_writes(
    profile: Profile, readings: dict[str, Any]
) -> list[tuple[str, dict[str, Any], tuple[str, ...]]]:
    """Each set command with the value read back before (operation, fields, reads it needs):
    written back as read, nothing changes. The only ``output`` sent is the OFF word."""
    word = profile.word

    def switch(read: str) -> dict[str, Any]:
        return {"state": word("on" if readings.get(read) else "off")}

    volts, amps = readings.get("voltage_setpoint"), readings.get("current_limit")
    return [
        ("set_voltage", {"volts": volts}, ("voltage_setpoint",)),
        ("set_current_limit", {"amps": amps}, ("current_limit",)),
        ("apply", {"volts": volts, "amps": amps}, ("voltage_setpoint", "current_limit")),
        ("set_ovp", {"volts": readings.get("ovp_level")}, ("ovp_level",)),
        ("set_ocp", {"amps": readings.get("ocp_level")}, ("ocp_level",)),
        ("ovp_enable", switch("ovp_enabled"), ("ovp_enabled",)),
        ("ocp_enable", switch("ocp_enabled"), ("ocp_enabled",)),
        ("sense", {"sense": _sense_word(profile, readings.get("sense_state"))}, ("sense_state",)),
        ("ovp_clear", {}, ("ovp_tripped",)),
        ("ocp_clear", {}, ("ocp_tripped",)),
        ("output", {"state": word("off")}, ()),
    ]


def _confirm_off(runner: _Runner, supply: Any) -> None:
    """The check never turns anything on: confirm the output found OFF is still OFF."""
    try:
        if supply.output_is_on():
            from bringup.instruments.safety import make_safe

            make_safe(supply)
            runner.rows.append(
                CheckRow("supply", "output", FAILED, note="output read ON: switched OFF")
            )
    except BringupError as exc:
        runner.rows.append(CheckRow("supply", "output_state", FAILED, note=str(exc)))


def _sense_word(profile: Profile, state: Any) -> str | None:
    if state not in ("remote", "local") or not profile.has("sense"):
        return None
    return profile.word("sense_remote" if state == "remote" else "sense_local")


def _safe(values: dict[str, Any]) -> dict[str, Any]:
    return {k: (0 if v is None else v) for k, v in values.items()}


def check_thermometer(session: InstrumentSession, thermometer: Any) -> list[CheckRow]:
    """Rows for the temperature meter (configure, reference junction, unit, readings)."""
    runner = _Runner("thermometer", session, thermometer._fields())
    if not _start("thermometer", session, runner):
        return runner.rows
    profile = session.profile
    runner.command("configure_sensor")
    if profile.has("reference_junction"):
        runner.command("reference_junction", reference=profile.word("reference_internal"))
    else:
        runner.skip_absent("reference_junction")
    runner.command("temperature_unit", unit=profile.word("unit_celsius"))
    ok, value = runner.query("read_temperature")
    if ok and not -273.15 < value < 2000:
        runner.rows[-1].status = FAILED
        runner.rows[-1].note = f"{value:g} is no temperature in degrees Celsius"
    runner.query("measure_voltage")
    _rest(runner)
    return runner.rows


def check_scope(
    session: InstrumentSession, channels: dict[int, float], block_dtype: str | None
) -> list[CheckRow]:
    """Rows for the scope: a short capture's set-up on the first wired channel (``channels``:
    channel -> probe ratio), an acquisition, its preamble, block and measurements."""
    profile = session.profile
    channel = min(channels) if channels else 1
    ratio = channels.get(channel, 1.0)
    w = profile.words
    fields = {
        "channel": channel,
        "state": w.get("on"),
        "coupling": w.get("coupling_dc"),
        "ratio": ratio,
        "source": profile.word("channel_source", channel=channel)
        if "channel_source" in w
        else None,
        "slope": w.get("slope_rising"),
        "plus": 1,
        "minus": 2,
        "points": 1000,
        # the derived values a profile may send instead (see profiles/README.md), for the
        # settings sent below: 10 x ratio volts full scale centred on 0 V, 100 us from -50 us
        "gain": 1.0 / ratio,
        "volts_per_div": 10.0 * ratio / profile.vertical_divisions,
        "position_div": 0.0,
        "shift_volts": 0.0,
        "seconds_per_div": 1e-4 / profile.horizontal_divisions,
        "centre_seconds": 0.0,
        "pretrigger_percent": 50.0,
        "first": 1,
        "last": 1000,
    }
    if profile.block is not None:
        fields["format"] = w.get(f"format_{profile.block.datatype}")
        fields["order"] = w.get("order_big" if profile.block.big_endian else "order_little")
    runner = _Runner("scope", session, fields)
    if not _start("scope", session, runner):
        return runner.rows
    off = w.get("off")
    runner.command("channel_state")
    runner.command("probe_ratio")
    runner.command("coupling")
    runner.command("bandwidth_limit", state=profile.word("bandwidth_off"))
    runner.command("vertical_range", volts=10.0 * ratio)
    runner.command("vertical_offset", volts=0.0)
    runner.command("record_points")
    runner.command("record_duration", seconds=1e-4)
    runner.command("record_start", seconds=-5e-5)
    runner.query("sample_interval")
    runner.command("trigger_source")
    runner.command("trigger_level", volts=0.0)
    runner.command("trigger_slope")
    runner.command("math_expression")
    runner.command("math_state", state=off)
    runner.command("data_format")
    runner.command("byte_order")
    scope = Scope(session)
    if runner.command("arm"):
        try:  # wait for the acquisition the way a run does
            scope.wait_for_acquisition()
        except BringupError as exc:
            runner.rows[-1].status = FAILED
            runner.rows[-1].reply = str(exc)
    runner.command("data_source")
    runner.command("data_range")
    _record(runner, scope, channel)
    runner.query("measure_mean")
    runner.query("measure_peak_to_peak")
    runner.command("stop")
    _rest(runner)
    return runner.rows


def _record(runner: _Runner, scope: Scope, channel: int) -> None:
    """The preamble and the record, fetched as a run fetches them (scale terms evaluated,
    pages read, the record checked against the instrument's own measurements)."""
    sent = runner.text("waveform_data")
    try:
        wf = scope.fetch_waveform(channel)
        runner.session.check_errors(sent)
    except BringupError as exc:
        runner.row("waveform_data", FAILED, sent, None, str(exc))
        runner.done.add("waveform_preamble")
        return
    if runner.profile.has("waveform_preamble"):
        runner.row("waveform_preamble", WORKS, runner.text("waveform_preamble"))
    runner.row(
        "waveform_data",
        WORKS,
        sent,
        f"{wf.points} codes, {wf.volts().min():.4g} V to {wf.volts().max():.4g} V, "
        "checked against the instrument's own measurements where offered",
    )


def _rest(runner: _Runner) -> None:
    """Operations of the profile this check did not reach: absent ones say so; others are not
    tried (no safe value is known for them)."""
    kind = runner.profile.kind
    for operation in OPERATIONS[kind]:
        if operation in runner.done:
            continue
        if operation in runner.profile.absent:
            runner.row(operation, ABSENT, note="declared absent in [profile] absent")
        elif runner.profile.has(operation):
            runner.row(operation, NOT_TRIED, runner.text(operation), note="no safe way known")
        elif operation in OPTIONAL.get(kind, ()):
            runner.done.add(operation)


def check_instrument(config: Any, role: str, profile: Profile) -> list[CheckRow]:
    """Open the bench file's ``role`` instrument with ``profile``, check it, close it.

    A connection that cannot be made is one failed row; nothing else is tried."""
    from bringup.instruments.supply import Supply
    from bringup.instruments.thermometer import Thermometer

    entry = config.instruments[role]
    session = InstrumentSession(role, entry.resource, profile)
    try:
        session.open()
        if role == "scope":
            ratios = {n: w.probe_ratio for n, w in config.channels.items()}
            return check_scope(session, ratios, profile.block.dtype if profile.block else None)
        if role == "supply":
            supply = Supply(session, channel=entry.channel or 1, remote_sense=entry.remote_sense)
            return check_supply(session, supply)
        meter = Thermometer(session, channel=entry.channel or 1, thermocouple=entry.thermocouple)
        return check_thermometer(session, meter)
    except BringupError as exc:
        return [CheckRow(role, "identify", FAILED, None, None, str(exc))]
    finally:
        session.close()
