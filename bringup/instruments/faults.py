"""The ``InstrumentFault`` family: everything that can go wrong talking to an instrument.

Each fault names the instrument (its bench role, e.g. ``supply``), the command that was sent
and what happened, in one line. The runner shows the message; the safe-state owner
(``bringup.instruments.safety``) turns the supply output off when any of them escapes a
powered step.
"""

from __future__ import annotations

from bringup.errors import BringupError


class InstrumentFault(BringupError):
    """Base of every instrument failure.

    ``instrument`` is the bench role (``scope``, ``supply``, ``thermometer``), ``command``
    the SCPI text sent (or ``None`` when the fault is not tied to one command).
    """

    what = "instrument fault"

    def __init__(self, instrument: str, command: str | None, detail: str):
        self.instrument = instrument
        self.command = command
        self.detail = detail
        where = instrument if command is None else f"{instrument} after {command!r}"
        super().__init__(f"{where}: {self.what}: {detail}")


class InstrumentTimeout(InstrumentFault):
    """No (complete) reply within the operation's timeout."""

    what = "no reply in time"


class ConnectionLost(InstrumentFault):
    """The connection closed or failed (cable, power, instrument reboot)."""

    what = "connection lost"


class GarbageReply(InstrumentFault):
    """A reply that cannot be what the command asks for (not a number, bad block header)."""

    what = "garbled reply"


class ReplyNotDescribed(GarbageReply):
    """A reply the profile cannot describe (a word no ``[replies]`` entry maps, a unit or header
    ``[numbers]`` does not declare): the profile, not the instrument, is probably what is
    wrong, so the message names the profile file and key and quotes the reply."""

    what = "reply not described by the profile"


class TruncatedBlock(InstrumentFault):
    """A binary block that ended before the byte count its header announced."""

    what = "waveform block cut short"


class Overrange(InstrumentFault):
    """The instrument answered the SCPI 'no value' number (9.9E37 / 9.91E37).

    SCPI-99 uses 9.9E37 for +INF and 9.91E37 for NaN; instruments answer it when a
    measurement cannot be made, for example beyond the selected range.
    """

    what = "measurement over range (instrument answered 9.9E37)"


class UnexpectedIdentity(InstrumentFault):
    """``*IDN?`` does not match the profile's identity pattern: wrong instrument or profile."""

    what = "unexpected identity"


class InstrumentError(InstrumentFault):
    """An entry of the instrument's SCPI error queue (``SYSTem:ERRor?``) after a command."""

    what = "instrument reported an error"

    def __init__(self, instrument: str, command: str | None, code: int, text: str):
        self.code = code
        self.text = text
        super().__init__(instrument, command, f"{code},{text!r}")


class RecordMismatch(InstrumentFault):
    """A fetched record that does not hold together (point count, code range) or disagrees
    with the instrument's own measurement of it: the scale is wrong, so no volt of it is used.
    ``key`` is the profile key most likely wrong."""

    what = "record does not agree with the instrument"

    def __init__(self, instrument: str, command: str | None, detail: str, key: str):
        self.key = key
        super().__init__(instrument, command, detail)


class NotOffered(InstrumentFault):
    """The profile declares the operation absent: this instrument does not offer it."""

    what = "operation not offered"


class ProtectionFault(InstrumentFault):
    """The supply's protection is not what was asked (read-back mismatch, OVP tripped),
    or the output could not be confirmed OFF."""

    what = "supply protection"
