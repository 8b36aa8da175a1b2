"""The scope driver: channels, probe ratio, timebase, trigger, math difference, acquisition,
and the fetch of a record with its scale, checked before anyone reads a volt of it.

Every command string comes from the scope's profile; this module only decides the order of
operations and the units (volts at the probe tip, seconds, points), and fills the derived
placeholders a profile may use instead (volts per division with the profile's division
count, seconds per division, vertical position in divisions, probe gain = 1/ratio, the
trigger level's source).

A fetched record is checked before it is returned (``check_record``): the point count the
preamble announced must match the block, the codes must lie inside the profile's code range,
and where the profile offers the instrument's own mean or peak-to-peak measurement the
record's must agree within the profile's tolerance (a fraction of the channel's full scale).
A disagreement is a ``RecordMismatch`` naming the profile key most likely wrong: a record read
with a wrong scale never becomes a number.
"""

from __future__ import annotations

import dataclasses
import sys
import time
from typing import Any, Literal

import numpy as np

from bringup.errors import InputError
from bringup.instruments import faults
from bringup.instruments.profiles import BlockFormat, ScaleTerm
from bringup.instruments.visa import InstrumentSession, strip_header
from bringup.instruments.waveform import Waveform

Source = int | Literal["math"]
WHOLE_RECORD = 1_000_000_000  # a last point beyond any record: the instrument clamps it


def split_fields(text: str, separator: str) -> list[str]:
    """Split ``text`` at ``separator`` outside double-quoted strings (IEEE 488.2 8.7.8 string
    response data may hold the separator); fields are stripped of white space."""
    out, start, quoted = [], 0, False
    for i, c in enumerate(text):
        if c == '"':
            quoted = not quoted
        elif c == separator and not quoted:
            out.append(text[start:i].strip())
            start = i + 1
    out.append(text[start:].strip())
    return out


class Scope:
    """A digitising oscilloscope reached through ``session`` (see ``InstrumentSession``)."""

    def __init__(self, session: InstrumentSession):
        self.session = session
        self.profile = session.profile
        self.channels: tuple[int, ...] = tuple(range(1, self.profile.channel_count + 1))
        self._full_scale: dict[int, float] = {}  # volts, as last set on each channel
        self._math: tuple[int, int] | None = None
        self._points: int | None = None
        self._wire_block = _wire_block(self.profile)

    def _channel(self, channel: int) -> int:
        if channel not in self.channels:
            raise InputError(
                f"scope channel {channel!r}: must be one of 1-{self.channels[-1]} "
                f"(profile {self.profile.name!r})"
            )
        return channel

    def _state(self, on: bool) -> str:
        return self.profile.word("on" if on else "off")

    def _not_offered(self, what: str) -> faults.NotOffered:
        return faults.NotOffered(
            self.session.role, None, f"{what} is declared absent in profile {self.profile.name!r}"
        )

    def _offered(self, operation: str) -> None:
        if not self.profile.has(operation):
            raise self._not_offered(repr(operation))

    def check_offers(
        self,
        *,
        channels: list[int],
        math: bool = False,
        bandwidth_limit: bool = False,
        couplings: set[str] | frozenset[str] = frozenset({"dc"}),
    ) -> None:
        """``NotOffered`` naming what a set-up needs and the profile lacks (channels beyond
        its count, the math channel, the bandwidth limit, ground coupling), without sending
        anything: called before a step energises the board."""
        missing = [f"channel {n}" for n in channels if n not in self.channels]
        if math and not (
            self.profile.has("math_expression")
            and self.profile.has("math_state")
            and self.profile.has_word("math_source")
        ):
            missing.append("the math channel")
        if bandwidth_limit and not self.profile.has("bandwidth_limit"):
            missing.append("the bandwidth limit")
        if "gnd" in couplings and not self.profile.has_word("coupling_gnd"):
            missing.append("ground coupling")
        if missing:
            raise faults.NotOffered(
                self.session.role,
                None,
                f"the step needs {', '.join(missing)}, which profile {self.profile.name!r} "
                "declares absent; nothing was energised",
            )

    def source_word(self, source: Source) -> str:
        """The instrument's name of a source: a channel or ``"math"``."""
        if source == "math":
            if not self.profile.has_word("math_source"):
                raise self._not_offered("the math channel")
            return self.profile.word("math_source")
        return self.profile.word("channel_source", channel=self._channel(int(source)))

    def _fields(self, source: Source) -> dict[str, Any]:
        return {"source": self.source_word(source), "channel": 0 if source == "math" else source}

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
        probe tip, over the profile's vertical divisions), centre ``offset_v`` (volts),
        coupling, optional 20 MHz limit and probe ratio. Each step is followed by an
        error check."""
        ch = self._channel(channel)
        if range_v <= 0:
            raise InputError(f"scope channel {ch}: range must be above 0 V, not {range_v!r}")
        if coupling == "gnd" and not self.profile.has_word("coupling_gnd"):
            raise self._not_offered("ground coupling (words.coupling_gnd)")
        if bandwidth_limit and not self.profile.has("bandwidth_limit"):
            raise self._not_offered("the bandwidth limit")
        s = self.session
        if probe_ratio is not None:
            self.set_probe_ratio(ch, probe_ratio)
        s.configure("channel_state", channel=ch, state=self._state(True))
        s.configure("coupling", channel=ch, coupling=self.profile.word(f"coupling_{coupling}"))
        if self.profile.has("bandwidth_limit"):
            word = self.profile.word("bandwidth_on" if bandwidth_limit else "bandwidth_off")
            s.configure("bandwidth_limit", channel=ch, state=word)
        per_div = float(range_v) / self.profile.vertical_divisions
        s.configure("vertical_range", channel=ch, volts=float(range_v), volts_per_div=per_div)
        s.configure(
            "vertical_offset",
            channel=ch,
            volts=float(offset_v),
            # the trace moved up by this many divisions (or volts) puts offset_v at the
            # screen's centre
            position_div=-float(offset_v) / per_div,
            shift_volts=-float(offset_v),
        )
        self._full_scale[ch] = float(range_v)

    def disable_channel(self, channel: int) -> None:
        """Turn ``channel`` off."""
        self.session.configure(
            "channel_state", channel=self._channel(channel), state=self._state(False)
        )

    def set_probe_ratio(self, channel: int, ratio: float) -> None:
        """The probe's attenuation ratio (1, 10, 100...), so readings are at the probe tip."""
        if ratio <= 0:
            raise InputError(f"scope channel {channel}: probe ratio must be above 0, not {ratio!r}")
        self.session.configure(
            "probe_ratio", channel=self._channel(channel), ratio=float(ratio), gain=1.0 / ratio
        )

    # -- horizontal and trigger ----------------------------------------------------------
    def configure_timebase(self, *, duration_s: float, points: int, start_s: float = 0.0) -> float:
        """Record ``points`` samples over ``duration_s`` seconds, the first at ``start_s``
        seconds from the trigger (negative = pre-trigger). Returns the sample interval (s):
        the instrument's answer, or duration / points when it has no such query."""
        if duration_s <= 0 or points < 2:
            raise InputError(
                f"scope timebase: need duration > 0 s and >= 2 points, not {duration_s!r}, {points!r}"
            )
        s = self.session
        duration = float(duration_s)
        s.configure("record_points", points=int(points))
        s.configure(
            "record_duration",
            seconds=duration,
            seconds_per_div=duration / self.profile.horizontal_divisions,
        )
        s.configure(
            "record_start",
            seconds=float(start_s),
            centre_seconds=float(start_s) + duration / 2,
            pretrigger_percent=-100.0 * float(start_s) / duration,
        )
        self._points = int(points)
        if self.profile.has("sample_interval"):
            return s.ask_number("sample_interval")
        return duration / int(points)

    def configure_trigger(
        self, *, source: Source, level_v: float, slope: Literal["rising", "falling"] = "rising"
    ) -> None:
        """Edge trigger on ``source`` at ``level_v`` volts (probe tip) on a rising/falling edge."""
        s = self.session
        fields = self._fields(source)
        s.configure("trigger_source", **fields)
        s.configure("trigger_level", volts=float(level_v), **fields)
        s.configure("trigger_slope", slope=self.profile.word(f"slope_{slope}"))

    def configure_math_difference(self, plus: int, minus: int) -> None:
        """The math channel as ``CH<plus> - CH<minus>`` (volts), turned on.

        A difference of two single-ended probes is a poor substitute for a differential probe
        at high common mode: a small gain mismatch swamps the difference."""
        if not (self.profile.has("math_expression") and self.profile.has("math_state")):
            raise self._not_offered("the math channel")
        s = self.session
        s.configure("math_expression", plus=self._channel(plus), minus=self._channel(minus))
        s.configure("math_state", state=self._state(True))
        self._math = (plus, minus)

    def disable_math(self) -> None:
        """Turn the math channel off (nothing to do on a scope without one)."""
        if self.profile.has("math_state"):
            self.session.configure("math_state", state=self._state(False))
        self._math = None

    # -- acquisition ---------------------------------------------------------------------
    def arm(self) -> None:
        """Arm one acquisition (single shot)."""
        self.session.configure("arm")

    def stop(self) -> None:
        """Stop acquiring (optional: ``NotOffered`` when the profile declares it absent)."""
        self._offered("stop")
        self.session.configure("stop")

    def wait_for_acquisition(self) -> None:
        """Block until the armed acquisition is complete: ``*OPC?`` answering 1, or the
        profile's ``acquisition_state?`` answering one of its ``done`` words, polled for at
        most ``[acquire] timeout_ms`` (``InstrumentTimeout`` naming the last reply)."""
        rule = self.profile.acquire
        assert rule is not None  # a scope profile always has one (defaults to *OPC?)
        s = self.session
        if rule.completion == "opc":
            reply = s.query(s.command_text("operation_complete"), timeout_ms=rule.timeout_ms)
            if reply.strip().lstrip("+") not in ("1", "1.0"):
                raise faults.GarbageReply(
                    s.role, s.command_text("operation_complete"), f"expected 1, got {reply[:40]!r}"
                )
            return
        done = {d.upper() for d in rule.done}
        deadline = time.monotonic() + rule.timeout_ms / 1000
        while True:
            reply = s.ask("acquisition_state")
            if reply.strip().strip('"').upper() in done:
                return
            if time.monotonic() >= deadline:
                raise faults.InstrumentTimeout(
                    s.role,
                    s.command_text("acquisition_state"),
                    f"acquisition not complete within {rule.timeout_ms} ms: last reply "
                    f"{reply[:40]!r}, complete is one of {', '.join(rule.done)} "
                    f"([acquire] done in {self.profile.path})",
                )
            time.sleep(rule.poll_interval_ms / 1000)

    def acquire(self) -> None:
        """Arm and wait for one acquisition."""
        self.arm()
        self.wait_for_acquisition()

    # -- transfer ------------------------------------------------------------------------
    @property
    def _block(self) -> BlockFormat:
        block = self._wire_block
        assert block is not None  # a scope profile always has one (checked on load)
        return block

    def _mismatch(
        self, command: str, key: str, reply: str, problem: str
    ) -> faults.ReplyNotDescribed:
        return faults.ReplyNotDescribed(
            self.session.role,
            command,
            f"{self.profile.path} key {key}: {problem}; reply {reply[:120]!r}",
        )

    def _send_format(self) -> None:
        block = self._block
        if self.profile.has("data_format"):
            self.session.configure(
                "data_format", format=self.profile.word(f"format_{block.datatype}")
            )
        if self.profile.has("byte_order"):
            word = "order_big" if block.big_endian else "order_little"
            self.session.configure("byte_order", order=self.profile.word(word))

    def _preamble(self, fields: dict[str, Any]) -> dict[str, str]:
        block, s = self._block, self.session
        if not self.profile.has("waveform_preamble"):
            return {}
        command = s.command_text("waveform_preamble", **fields)
        text = s.ask("waveform_preamble", **fields)
        values = split_fields(text, block.preamble_separator)
        if self.profile.echoes_headers:
            values = [strip_header(v) for v in values]
        want = len(block.preamble_fields)
        if len(values) < want or (len(values) > want and not block.preamble_open):
            raise self._mismatch(
                command,
                "preamble.fields",
                text,
                f"declares {want} fields separated by {block.preamble_separator!r}, "
                f"the reply has {len(values)}",
            )
        return dict(zip(block.preamble_fields, values, strict=False))

    def _term(
        self, name: str, term: ScaleTerm, values: dict[str, str], fields: dict[str, Any], pre: str
    ) -> float:
        s = self.session
        if term.constant is not None:
            return term.constant
        if term.query is not None:
            line = term.query.format(**fields)
            text = s.query(line, timeout_ms=self.profile.default_timeout_ms)
            if self.profile.echoes_headers:
                text = strip_header(text)
            try:
                return float(text)
            except ValueError:
                raise self._mismatch(line, f"scale.{name}", text, "not a number") from None
        total = 0.0
        for field_name in term.fields:
            text = values[field_name].strip('"')
            try:
                total += float(text)
            except ValueError:
                raise self._mismatch(
                    pre, f"scale.{name}", text, f"preamble field {field_name!r} is not a number"
                ) from None
        return total

    def _read_codes(self, fields: dict[str, Any], announced: int | None) -> np.ndarray:
        block, s = self._block, self.session
        data_cmd = s.profile.lines("waveform_data", **fields)[-1]
        ms = self.profile.timeout_ms("waveform_data")
        if not block.binary:
            text = s.ask("waveform_data", **fields)
            return self._ascii(text, s.command_text("waveform_data", **fields))
        dtype = np.dtype(block.dtype)
        native = dtype.newbyteorder("=")
        page = block.page_points
        if page is None or announced is None:
            s._lead_in("waveform_data", **fields)
            return s.query_block(data_cmd, block.dtype, timeout_ms=ms)
        out = np.empty(announced, dtype=native)
        with s.lock:
            joiner = self.profile.write_termination
            starts = list(range(0, announced, page))

            def message(first: int) -> str:
                # the range and the query go out in one write (separate program messages,
                # one send) and no error check between pages (it would double the round
                # trips): the instrument's error report is read once, after the last page
                last = min(first + page, announced)
                lines = self.profile.lines("data_range", first=first + 1, last=last)
                return joiner.join([*lines, data_cmd])

            ahead = block.pipeline
            if ahead:
                s.write(message(starts[0]))
            for k, first in enumerate(starts):
                last = min(first + page, announced)
                if ahead and k + 1 < len(starts):
                    # the next page is asked for before this one is read: the instrument
                    # prepares it while this one travels ([block] pipeline)
                    s.write(message(starts[k + 1]))
                got = s.query_block(
                    message(first),
                    block.dtype,
                    timeout_ms=ms,
                    into=out[first:last],
                    send=not ahead,
                )
                if got.size != last - first:
                    raise faults.TruncatedBlock(
                        s.role,
                        data_cmd,
                        f"page of points {first + 1}-{last}: {got.size} codes came "
                        f"(block.page_points = {page} in {self.profile.path})",
                    )
            s.check_errors(s.command_text("data_range", first=1, last=announced))
        return out

    def _ascii(self, text: str, command: str) -> np.ndarray:
        body = text.strip()
        if body.startswith("#") and len(body) > 2 and body[1].isdigit():
            digits = int(body[1])  # an ASCII record inside a definite-length block header
            body = body[2 + digits :]
        try:
            return np.array(
                [float(v) for v in body.replace(";", ",").split(",") if v.strip()], dtype=np.float64
            )
        except ValueError:
            raise self._mismatch(
                command, "block.datatype", body[:60], "'ascii' expects numbers separated by ','"
            ) from None

    def fetch_waveform(self, source: Source) -> Waveform:
        """The last record of ``source`` (a channel or ``"math"``) as raw codes plus scale,
        checked (``check_record``) before it is returned.

        Selects the source and the profile's block format, reads the preamble and evaluates
        the scale terms, then the codes (page by page for a profile with ``page_points``)."""
        s, block = self.session, self._block
        fields = self._fields(source)
        if self.profile.has("data_source"):
            s.configure("data_source", **fields)
        self._send_format()  # every time: another client may have changed it
        if self.profile.has("data_range") and self._block.page_points is None:
            # the whole record in one transfer (the preamble then announces all of it)
            s.configure("data_range", first=1, last=self._points or WHOLE_RECORD)
        pre = (
            s.command_text("waveform_preamble", **fields)
            if self.profile.has("waveform_preamble")
            else ""
        )
        values = self._preamble(fields)
        terms = {k: self._term(k, t, values, fields, pre) for k, t in block.scale.items()}
        announced = None
        if "points" in terms:
            announced = int(round(terms["points"]))
            if announced < 1 or announced != terms["points"]:
                raise self._mismatch(
                    pre, "scale.points", str(terms["points"]), "not a whole count of points"
                )
        codes = self._read_codes(fields, announced)
        data_cmd = s.command_text("waveform_data", **fields)
        step, offset, zero = terms["y_step"], terms["code_offset"], terms["y_zero"]
        wf = Waveform(
            source=fields["source"],
            codes=codes,
            y_increment=step,
            y_origin=zero - offset * step,
            x_increment=terms["x_step"],
            x_origin=terms["x_zero"] - terms["x_ref"] * terms["x_step"],
        )
        self.check_record(wf, source, announced, data_cmd)
        return wf

    # -- scalar measurements (optional operations) ---------------------------------------
    def measure_mean(self, source: Source) -> float:
        """The instrument's own mean of the last record of ``source``, volts."""
        self._offered("measure_mean")
        return self.session.ask_number("measure_mean", **self._fields(source))

    def measure_peak_to_peak(self, source: Source) -> float:
        """The instrument's own peak-to-peak of the last record of ``source``, volts."""
        self._offered("measure_peak_to_peak")
        return self.session.ask_number("measure_peak_to_peak", **self._fields(source))

    # -- the record check ----------------------------------------------------------------
    def _full_scale_of(self, source: Source, wf: Waveform) -> float:
        if source == "math" and self._math is not None:
            a, b = self._math
            if a in self._full_scale and b in self._full_scale:
                return self._full_scale[a] + self._full_scale[b]
        elif source != "math" and int(source) in self._full_scale:
            return self._full_scale[int(source)]
        block = self._block
        if block.binary and block.datatype != "float32":
            return abs(wf.y_increment) * (block.code_max - block.code_min)
        volts = wf.volts()
        return float(np.ptp(volts)) or 1.0

    def _instrument_says(self, operation: str, fields: dict[str, Any]) -> float | None:
        if not self.profile.has(operation):
            return None
        try:
            return self.session.ask_number(operation, **fields)
        except faults.Overrange:
            return None  # the instrument cannot measure it (a clipped record): nothing to compare

    def check_record(
        self, wf: Waveform, source: Source, announced: int | None, command: str
    ) -> None:
        """Raise ``RecordMismatch`` (naming the profile key most likely wrong) unless the
        record holds the announced point count, its codes lie in the profile's code range,
        and its mean and peak-to-peak agree with the instrument's own measurements (where the
        profile offers them) within ``[checks] tolerance`` of the full scale."""
        block, role, path = self._block, self.session.role, self.profile.path
        codes = wf.codes
        if announced is not None and codes.size != announced:
            ratio = codes.size / announced if announced else 0
            key = "block.datatype" if ratio in (0.5, 2.0, 4.0, 0.25) else "scale.points"
            raise faults.RecordMismatch(
                role,
                command,
                f"the block holds {codes.size} codes, the preamble announced {announced}; "
                f"most likely wrong: {key} in {path}",
                key,
            )
        if codes.size == 0:
            raise faults.RecordMismatch(
                role,
                command,
                f"an empty record; most likely wrong: scale.points in {path}",
                "scale.points",
            )
        if codes.dtype.kind == "f" and not np.isfinite(codes).all():
            raise faults.RecordMismatch(
                role,
                command,
                f"codes that are not numbers; most likely wrong: block.datatype in {path}",
                "block.datatype",
            )
        lo, hi = codes.min(), codes.max()
        if lo < block.code_min or hi > block.code_max:
            raise faults.RecordMismatch(
                role,
                command,
                f"codes {lo:g}..{hi:g} outside the declared {block.code_min:g}..{block.code_max:g}; "
                f"most likely wrong: block.datatype (or block.code_min/code_max) in {path}",
                "block.datatype",
            )
        fields = self._fields(source)
        mean_i = self._instrument_says("measure_mean", fields)
        ptp_i = self._instrument_says("measure_peak_to_peak", fields)
        if mean_i is None and ptp_i is None:
            return
        tol = block.tolerance * self._full_scale_of(source, wf)
        extremes = (float(lo), float(hi))
        problem = judge_record(
            codes, wf.y_increment, wf.y_origin, block, mean_i, ptp_i, tol, extremes
        )
        if problem is not None:
            text, key = problem
            raise faults.RecordMismatch(
                role, command, f"{text}; most likely wrong: {key} in {path}", key
            )


def _wire_block(profile) -> BlockFormat | None:
    """The profile's block format in the byte order the driver asks for: this host's own
    where the profile can say both orders, so that no record is byte-swapped on arrival (a
    whole extra pass over it); the profile's declared order otherwise."""
    block = profile.block
    if block is None:
        return None
    native_big = sys.byteorder == "big"
    word = "order_big" if native_big else "order_little"
    if block.big_endian != native_big and profile.has("byte_order") and profile.has_word(word):
        return dataclasses.replace(block, big_endian=native_big)
    return block


# Rows of at most 2^15 codes of 16 bits or fewer sum exactly in int32 (2^15 x 2^16 < 2^31).
_SUM_ROW = 1 << 15


def mean_code(codes: np.ndarray) -> float:
    """The exact mean of a record's codes. Codes of 8 or 16 bits are summed in rows of 2^15
    in int32 (exact, and twice as fast as converting every code to float64), then the row
    sums in int64; other codes through float64."""
    if codes.dtype.kind not in "iu" or codes.dtype.itemsize > 2 or codes.size == 0:
        return float(codes.mean(dtype=np.float64))
    flat = codes.reshape(-1)
    whole = flat.size - flat.size % _SUM_ROW
    total = int(flat[:whole].reshape(-1, _SUM_ROW).sum(axis=1, dtype=np.int32).sum(dtype=np.int64))
    total += int(flat[whole:].sum(dtype=np.int64))
    return total / flat.size


def _stats(
    codes: np.ndarray, step: float, origin: float, extremes: tuple[float, float] | None = None
) -> tuple[float, float]:
    """(mean, peak-to-peak) in volts; ``extremes`` the codes' (min, max) when already known."""
    mean = mean_code(codes) * step + origin
    lo, hi = extremes if extremes is not None else (float(codes.min()), float(codes.max()))
    return mean, (hi - lo) * abs(step)


def _alternatives(codes: np.ndarray, block: BlockFormat) -> list[tuple[str, str, np.ndarray]]:
    """Other readings of the same bytes: the other signedness, the other byte order."""
    out = []
    kind = codes.dtype
    if kind.kind in "iu" and block.datatype != "ascii":
        other = np.dtype(("u" if kind.kind == "i" else "i") + str(kind.itemsize))
        out.append(("block.datatype", f"read as {other.name}", codes.view(other)))
    if kind.itemsize > 1 and block.datatype != "ascii":
        swapped = codes.byteswap()
        order = "little" if block.big_endian else "big"
        out.append(("block.byte_order", f"read {order}-endian", swapped))
    return out


def judge_record(
    codes: np.ndarray,
    step: float,
    origin: float,
    block: BlockFormat,
    mean_i: float | None,
    ptp_i: float | None,
    tol: float,
    extremes: tuple[float, float] | None = None,
) -> tuple[str, str] | None:
    """Compare a record (``codes`` with volts = codes * step + origin) with the instrument's
    own mean and peak-to-peak (volts; None = not offered). Returns None when they agree within
    ``tol`` volts, else (what disagrees, the profile key most likely wrong).

    The key: another reading of the same bytes (signedness, byte order) that makes them agree
    names ``block.datatype``/``block.byte_order``; a right peak-to-peak with a wrong mean names
    the offset terms; anything else the step. ``extremes``: the codes' (min, max) if known."""
    if mean_i is None and ptp_i is None:
        return None
    if mean_i is None:  # only the peak-to-peak to compare: no need of the mean
        lo, hi = extremes if extremes is not None else (float(codes.min()), float(codes.max()))
        mean, ptp = 0.0, (hi - lo) * abs(step)
    else:
        mean, ptp = _stats(codes, step, origin, extremes)

    def agrees(m: float, p: float) -> tuple[bool, bool]:
        return (
            mean_i is None or abs(m - mean_i) <= tol,
            ptp_i is None or abs(p - ptp_i) <= tol,
        )

    ok_mean, ok_ptp = agrees(mean, ptp)
    if ok_mean and ok_ptp:
        return None
    said = []
    if not ok_mean:
        said.append(f"record mean {mean:.6g} V, the instrument's own {mean_i:.6g} V")
    if not ok_ptp:
        said.append(f"record peak-to-peak {ptp:.6g} V, the instrument's own {ptp_i:.6g} V")
    text = "; ".join(said) + f" (tolerance {tol:.3g} V)"
    for key, how, alt in _alternatives(codes, block):
        a_mean, a_ptp = agrees(*_stats(alt, step, origin))
        # the peak-to-peak does not depend on the offset terms: a reading that makes it agree
        # points at the coding (with only a mean to compare, the mean has to agree)
        measure = "peak-to-peak" if ptp_i is not None else "mean"
        if a_ptp if ptp_i is not None else a_mean:
            return f"{text}; {how} the bytes agree in {measure}", key
    if ok_ptp and ptp_i is not None:
        return text, "scale.code_offset or scale.y_zero"
    return text, "scale.y_step"
