"""The scope driver: channels, probe ratio, timebase, trigger, math difference, acquisition.

Every command string comes from the scope's profile; this module only decides the order of
operations and the units (volts at the probe tip, seconds, points).
"""

from __future__ import annotations

from typing import Literal

from bringup.errors import InputError
from bringup.instruments import faults
from bringup.instruments.visa import InstrumentSession
from bringup.instruments.waveform import Waveform

Source = int | Literal["math"]
CHANNELS = (1, 2, 3, 4)


class Scope:
    """A digitising oscilloscope reached through ``session`` (see ``InstrumentSession``)."""

    def __init__(self, session: InstrumentSession):
        self.session = session
        self.profile = session.profile

    def _channel(self, channel: int) -> int:
        if channel not in CHANNELS:
            raise InputError(f"scope channel {channel!r}: must be one of 1-4")
        return channel

    def _state(self, on: bool) -> str:
        return self.profile.word("on" if on else "off")

    def source_word(self, source: Source) -> str:
        """The instrument's name of a source: channel 1-4 or ``"math"``."""
        if source == "math":
            return self.profile.word("math_source")
        return self.profile.word("channel_source", channel=self._channel(int(source)))

    # -- vertical ------------------------------------------------------------------------
    def configure_channel(
        self,
        channel: int,
        *,
        range_v: float,
        offset_v: float = 0.0,
        coupling: Literal["dc", "ac", "gnd"] = "dc",
        bandwidth_limit: bool = False,
        probe_ratio: float | None = None,
    ) -> None:
        """Turn ``channel`` on with a full-scale range ``range_v`` (volts peak-to-peak at the
        probe tip), centre ``offset_v`` (volts), coupling, optional 20 MHz limit and probe
        ratio. Each step is followed by an error-queue check."""
        ch = self._channel(channel)
        if range_v <= 0:
            raise InputError(f"scope channel {ch}: range must be above 0 V, not {range_v!r}")
        s = self.session
        if probe_ratio is not None:
            self.set_probe_ratio(ch, probe_ratio)
        s.configure("channel_state", channel=ch, state=self._state(True))
        s.configure("coupling", channel=ch, coupling=self.profile.word(f"coupling_{coupling}"))
        s.configure("bandwidth_limit", channel=ch, state=self._state(bandwidth_limit))
        s.configure("vertical_range", channel=ch, volts=float(range_v))
        s.configure("vertical_offset", channel=ch, volts=float(offset_v))

    def disable_channel(self, channel: int) -> None:
        """Turn ``channel`` off."""
        self.session.configure(
            "channel_state", channel=self._channel(channel), state=self._state(False)
        )

    def set_probe_ratio(self, channel: int, ratio: float) -> None:
        """The probe's attenuation ratio (1, 10, 100...), so readings are at the probe tip."""
        if ratio <= 0:
            raise InputError(f"scope channel {channel}: probe ratio must be above 0, not {ratio!r}")
        self.session.configure("probe_ratio", channel=self._channel(channel), ratio=float(ratio))

    # -- horizontal and trigger ----------------------------------------------------------
    def configure_timebase(self, *, duration_s: float, points: int, start_s: float = 0.0) -> float:
        """Record ``points`` samples over ``duration_s`` seconds, the first at ``start_s``
        seconds from the trigger (negative = pre-trigger). Returns the sample interval (s)."""
        if duration_s <= 0 or points < 2:
            raise InputError(
                f"scope timebase: need duration > 0 s and >= 2 points, not {duration_s!r}, {points!r}"
            )
        s = self.session
        s.configure("record_points", points=int(points))
        s.configure("record_duration", seconds=float(duration_s))
        s.configure("record_start", seconds=float(start_s))
        return s.ask_number("sample_interval")

    def configure_trigger(
        self, *, source: Source, level_v: float, slope: Literal["rising", "falling"] = "rising"
    ) -> None:
        """Edge trigger on ``source`` at ``level_v`` volts (probe tip) on a rising/falling edge."""
        s = self.session
        s.configure("trigger_source", source=self.source_word(source))
        s.configure("trigger_level", volts=float(level_v))
        s.configure("trigger_slope", slope=self.profile.word(f"slope_{slope}"))

    def configure_math_difference(self, plus: int, minus: int) -> None:
        """The math channel as ``CH<plus> - CH<minus>`` (volts), turned on.

        A difference of two single-ended probes is a poor substitute for a differential probe
        at high common mode: a small gain mismatch swamps the difference."""
        s = self.session
        s.configure("math_expression", plus=self._channel(plus), minus=self._channel(minus))
        s.configure("math_state", state=self._state(True))

    def disable_math(self) -> None:
        """Turn the math channel off."""
        self.session.configure("math_state", state=self._state(False))

    # -- acquisition ---------------------------------------------------------------------
    def arm(self) -> None:
        """Arm one acquisition (single shot)."""
        self.session.configure("arm")

    def _offered(self, operation: str) -> None:
        if not self.profile.has(operation):
            raise faults.NotOffered(
                self.session.role,
                None,
                f"{operation!r} is declared absent in profile {self.profile.name!r}",
            )

    def stop(self) -> None:
        """Stop acquiring (optional: ``NotOffered`` when the profile declares it absent)."""
        self._offered("stop")
        self.session.configure("stop")

    def wait_for_acquisition(self) -> None:
        """Block until the armed acquisition is complete (``*OPC?``, the profile's timeout)."""
        reply = self.session.ask("operation_complete")
        if reply.strip().lstrip("+") != "1":
            raise faults.GarbageReply(
                self.session.role,
                self.profile.command("operation_complete"),
                f"expected 1, got {reply[:40]!r}",
            )

    def acquire(self) -> None:
        """Arm and wait for one acquisition."""
        self.arm()
        self.wait_for_acquisition()

    def _send_format(self) -> None:
        block = self.profile.block
        assert block is not None  # a scope profile always has one (checked on load)
        self.session.configure("data_format", format=self.profile.word(f"format_{block.datatype}"))
        self.session.configure(
            "byte_order",
            order=self.profile.word("order_big" if block.big_endian else "order_little"),
        )

    def fetch_waveform(self, source: Source) -> Waveform:
        """The last record of ``source`` (channel 1-4 or ``"math"``) as raw codes plus scale.

        Sets the profile's block format first, reads the
        preamble, then the block; the code count must match the preamble's point count."""
        s = self.session
        block = self.profile.block
        assert block is not None
        self._send_format()  # every time: another client may have changed it
        word = self.source_word(source)
        preamble_cmd = s.command_text("waveform_preamble", source=word)
        text = s.ask("waveform_preamble", source=word)
        fields = [f.strip() for f in text.split(",")]
        if len(fields) != len(block.preamble):
            raise faults.GarbageReply(
                s.role, preamble_cmd, f"expected {len(block.preamble)} fields, got {text[:60]!r}"
            )
        try:
            values = {
                name: float(v)
                for name, v in zip(block.preamble, fields, strict=True)
                if name != "ignore"
            }
        except ValueError:
            raise faults.GarbageReply(s.role, preamble_cmd, f"not numbers: {text[:60]!r}") from None
        data_cmd = s.command_text("waveform_data", source=word)
        codes = s.query_block(
            data_cmd, block.dtype, timeout_ms=self.profile.timeout_ms("waveform_data")
        )
        if codes.size != int(values["points"]):
            raise faults.TruncatedBlock(
                s.role, data_cmd, f"{codes.size} codes, preamble says {int(values['points'])}"
            )
        return Waveform(
            source=word,
            codes=codes,
            y_increment=values["y_increment"],
            y_origin=values["y_origin"],
            x_increment=values["x_increment"],
            x_origin=values["x_origin"],
        )

    # -- scalar measurements -------------------------------------------------------------
    def measure_mean(self, source: Source) -> float:
        """Mean of the last record of ``source``, volts (optional operation)."""
        self._offered("measure_mean")
        return self.session.ask_number("measure_mean", source=self.source_word(source))

    def measure_peak_to_peak(self, source: Source) -> float:
        """Peak-to-peak of the last record of ``source``, volts (optional operation)."""
        self._offered("measure_peak_to_peak")
        return self.session.ask_number("measure_peak_to_peak", source=self.source_word(source))
