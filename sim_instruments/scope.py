"""The simulated oscilloscope ``NULLPOINT,SIMSCOPE-4``: four channels, edge trigger, math, blocks.

What a channel shows is built from the model's true analogue signal at the probe's net, in the
order a real front end applies it: probe gain error (a single-ended probe's ±0.3-0.5 %, fixed per
channel by the seed; a differential probe's ±0.1 %) and the ratio between the probe's real
attenuation and the one set on the channel; coupling (AC removes the record's mean); the analogue
bandwidth (first-order, 350 MHz, and a second first-order pole at 20 MHz with the limit on); the
front end's noise (0.15 % of the full-scale range rms at full bandwidth, scaled by the square root
of the bandwidth ratio with the limit on); then an 8-bit (or 12-bit) ADC that rounds and clips to
the screen (IEEE Std 1057 model of a digitizer: gain, offset, noise, quantisation).

Everything on the sample path is vectorised numpy (the filters too: ``one_pole``, without
scipy.signal, whose import alone took seconds in the first acquisition); a record is stored as
ADC codes and encoded once per transfer format, then sent as a buffer.
"""

from __future__ import annotations

import math
import threading
import time
from dataclasses import dataclass, field

import numpy as np

from sim_instruments.clock import SharedBoard, add_board_commands
from sim_instruments.faults import OVERRANGE, FaultInjector, add_fault_commands
from sim_instruments.model import NETS as NETS_OF_STAGE
from sim_instruments.scpi import (
    Block,
    CommandTree,
    Instrument,
    ScpiError,
    format_nr3,
    no_params,
    one_param,
    parse_bool,
    parse_choice,
    parse_number,
    unquote,
)

__all__ = ["Scope", "format_ascii", "MAX_POINTS", "FULL_BANDWIDTH_HZ", "LIMIT_BANDWIDTH_HZ"]

CHANNELS = (1, 2, 3, 4)
MIN_POINTS, MAX_POINTS = 1000, 20_000_000
FULL_BANDWIDTH_HZ = 350e6
LIMIT_BANDWIDTH_HZ = 20e6
NOISE_FRACTION = 0.0015  # rms noise / full-scale range at full bandwidth
NETS = ("GATE", "SWITCH", "VGS", "VBS", "BUS", "VDRV", "LOGIC", "VGS_LOW", "I_SWITCH")
FLOATING_NETS = ("vgs", "vbs")  # not referred to ground: differential probe only
CURRENT_NETS = ("i_switch",)  # a current (amperes at the tip): current probe only
#: A current probe's own delay behind a voltage probe, s: what a bench measures on a resistive
#: step and writes in the bench file as the channel's deskew (current probes' amplifiers lag
#: passive voltage probes by a few ns: common practice).
CURRENT_PROBE_SKEW_S = 7.0e-9
CONTINUOUS_REFRESH_S = 0.1  # wall seconds: a running scope's record is at most this old
_DEFAULT_PROBES = {1: ("gate", "SING", 10.0), 2: ("switch", "SING", 10.0)}
_DEFAULT_PROBES |= {3: ("vgs", "DIFF", 50.0), 4: ("vbs", "DIFF", 50.0)}
_DEFAULT_VERTICAL = {1: (48.0, 18.0), 2: (48.0, 18.0), 3: (24.0, 6.0), 4: (24.0, 6.0)}
# A half-bridge board's default wiring: the low gate (ground-referenced), the switch node, the
# high side's Vgs (differential) and a current probe (10 A/V) on the high side's drain.
_HALF_BRIDGE_PROBES = {1: ("vgs_low", "SING", 10.0), 2: ("switch", "SING", 10.0)}
_HALF_BRIDGE_PROBES |= {3: ("vgs", "DIFF", 50.0), 4: ("i_switch", "CURR", 10.0)}


@dataclass
class Probe:
    """The physical probe on a channel (simulation only): its net, kind, real ratio, gain error."""

    net: str
    kind: str  # "SING", "DIFF" or "CURR" (a current probe: ratio in A/V)
    ratio: float
    gain_error: float  # fraction, e.g. 0.004 = reads 0.4 % high
    skew_s: float = 0.0  # the probe's delay behind a voltage probe, s


@dataclass
class Channel:
    """A channel's settings. ``range_v`` full-scale at the probe tip, ``offset_v`` screen centre."""

    enabled: bool = True
    coupling: str = "DC"
    attenuation: float = 10.0
    bw_limit: bool = False
    range_v: float = 48.0
    offset_v: float = 18.0


@dataclass
class Trace:
    """One channel's stored record: ADC codes (or math volts) and their scaling."""

    codes: np.ndarray | None  # int16 ADC codes (channels)
    volts: np.ndarray | None  # float32 volts (math)
    lsb_v: float  # volts per ADC code (channels) / per int16 step of the full span (math)
    origin_v: float
    bits: int
    clipped: bool

    def as_volts(self) -> np.ndarray:
        if self.volts is not None:
            return self.volts
        return self.codes.astype(np.float32) * np.float32(self.lsb_v) + np.float32(self.origin_v)


@dataclass
class Record:
    """One acquisition: traces keyed ``"CH1".."CH4"``, ``"MATH"``; time base in seconds."""

    traces: dict[str, Trace]
    x_increment: float
    x_origin: float
    points: int
    triggered: bool
    wall_time: float
    cache: dict = field(default_factory=dict)


def format_ascii(values: np.ndarray, digits: int = 9) -> bytes:
    """Comma-separated NR3 numbers (``+1.23456789E+01``) for every value, fully vectorised.

    Fixed-width fields are written digit by digit as numpy columns (no Python loop over
    samples); chunked so memory stays bounded for 20 Mpt records.
    """
    width = digits + 7  # sign, digit, '.', digits-1, 'E', sign, two exponent digits, ','
    pows = 10 ** np.arange(digits - 1, -1, -1, dtype=np.int64)
    chunks = []
    for start in range(0, len(values), 1 << 20):
        v = np.asarray(values[start : start + (1 << 20)], dtype=np.float64)
        a = np.abs(v)
        zero = a < 1e-30
        safe = np.where(zero, 1.0, a)
        e = np.floor(np.log10(safe)).astype(np.int64)
        m = np.rint(safe / 10.0 ** (e - (digits - 1))).astype(np.int64)
        high = m >= 10**digits  # log10 rounded down past a power of ten
        e[high] += 1
        low = m < 10 ** (digits - 1)
        e[low] -= 1
        fix = high | low
        m[fix] = np.rint(safe[fix] / 10.0 ** (e[fix] - (digits - 1))).astype(np.int64)
        m[zero], e[zero] = 0, 0
        buf = np.empty((len(v), width), np.uint8)
        buf[:, 0] = np.where(v < 0, 45, 43)  # '-' / '+'
        digs = (m[:, None] // pows) % 10 + 48
        buf[:, 1] = digs[:, 0]
        buf[:, 2] = 46  # '.'
        buf[:, 3 : digits + 2] = digs[:, 1:]
        buf[:, digits + 2] = 69  # 'E'
        buf[:, digits + 3] = np.where(e < 0, 45, 43)
        ae = np.abs(e)
        buf[:, digits + 4] = ae // 10 + 48
        buf[:, digits + 5] = ae % 10 + 48
        buf[:, digits + 6] = 44  # ','
        chunks.append(buf.tobytes())
    return b"".join(chunks)[:-1]


def _source(text: str, math_ok: bool = True) -> str:
    """``CH<n>``/``CHANnel<n>`` -> ``"CH<n>"``; ``MATH`` -> ``"MATH"``; else -224."""
    word = unquote(text) if text.strip()[:1] in "\"'" else text.strip()
    word = word.upper()
    if math_ok and word in ("MATH", "MATH1"):
        return "MATH"
    for head in ("CHANNEL", "CHAN", "CH"):
        if word.startswith(head) and word[len(head) :].isdigit():
            n = int(word[len(head) :])
            if n in CHANNELS:
                return f"CH{n}"
    raise ScpiError(-224, f"expected CH1..CH4{' or MATH' if math_ok else ''}, got {text!r}")


class OwnDialect:
    """The simulator's own command tree (``NULLPOINT,SIMSCOPE-4``); other dialects
    (``scope_dialects``) subclass it."""

    model_name = "SIMSCOPE-4"

    def __init__(self, scope: Scope) -> None:
        self.scope = scope

    def build(self, tree: CommandTree) -> None:
        self.scope.build_native_commands(tree)


class Scope(Instrument):
    """Four-channel scope. State for tests: ``channels``, ``probes``, ``record``, ``acquisitions``."""

    model_name = "SIMSCOPE-4"

    def __init__(
        self,
        serial: str,
        board: SharedBoard,
        faults: FaultInjector,
        seed: int,
        dialect: type[OwnDialect] | None = None,
    ) -> None:
        self.dialect = (dialect or OwnDialect)(self)
        self.model_name = self.dialect.model_name
        self.board = board
        self.seed = seed
        gains = np.random.default_rng([seed, 7])
        single = gains.uniform(0.003, 0.005, 4) * np.array([1, -1, 1, -1])
        self._single_gain = {n: float(single[n - 1]) for n in CHANNELS}
        diff = gains.uniform(-0.001, 0.001, 4)
        self._diff_gain = {n: float(diff[n - 1]) for n in CHANNELS}
        current = gains.uniform(-0.01, 0.01, 4)
        self._current_gain = {n: float(current[n - 1]) for n in CHANNELS}
        self.probes: dict[int, Probe] = {}
        wiring = _DEFAULT_PROBES
        if "i_switch" in getattr(board.model, "nets", ()):
            wiring = _HALF_BRIDGE_PROBES
        for n, (net, kind, ratio) in wiring.items():
            self.probes[n] = Probe(net, kind, ratio, self._gain_for(n, kind), _skew(kind))
        self.record: Record | None = None
        self.single_thread: threading.Thread | None = None  # a single shot under way
        self.acquisitions = 0
        self._acquire_lock = threading.Lock()
        super().__init__(serial, board.lock, faults)
        self.reset()

    def _gain_for(self, n: int, kind: str) -> float:
        if kind == "CURR":
            return self._current_gain[n]
        return self._diff_gain[n] if kind == "DIFF" else self._single_gain[n]

    def reset(self) -> None:
        with self.lock:
            self.channels = {}
            for n in CHANNELS:
                rng, off = _DEFAULT_VERTICAL[n]
                self.channels[n] = Channel(
                    attenuation=self.probes[n].ratio, range_v=rng, offset_v=off
                )
            self.sweep_time_s = 100e-6
            self.points = 10_000
            self.sweep_offset_s = -50e-6
            self.trigger_source = 2
            self.trigger_level_v = 12.0
            self.trigger_slope = "POS"
            self.continuous = False
            self.math_expr: tuple[int, int] = (1, 2)
            self.math_on = False
            self.data_format = "ASC"
            self.byte_order = "NORM"
            self.resolution_bits = 8

    # --- acquisition ------------------------------------------------------------------------
    def acquire(self) -> Record:
        """Take one record of every enabled channel (and the math channel) and store it."""
        with self._acquire_lock:
            with self.lock:
                channels = {n: Channel(**vars(c)) for n, c in self.channels.items()}
                probes = {n: Probe(**vars(p)) for n, p in self.probes.items()}
                dt = self.sweep_time_s / self.points
                n_pts, offset = self.points, self.sweep_offset_s
                bits, math_on, (ma, mb) = self.resolution_bits, self.math_on, self.math_expr
                rng = np.random.default_rng([self.seed, 1, self.acquisitions])
                self.acquisitions += 1
                t_trig, triggered = self._find_trigger(channels, probes, dt, rng)
            traces: dict[str, Trace] = {}
            for n in CHANNELS:
                if channels[n].enabled:
                    traces[f"CH{n}"] = self._digitise(
                        channels[n], probes[n], t_trig + offset, dt, n_pts, bits, rng
                    )
            if math_on and f"CH{ma}" in traces and f"CH{mb}" in traces:
                diff = traces[f"CH{ma}"].as_volts() - traces[f"CH{mb}"].as_volts()
                span = channels[ma].range_v + channels[mb].range_v
                origin = channels[ma].offset_v - channels[mb].offset_v
                traces["MATH"] = Trace(None, diff, span / 65536.0, origin, 16, False)
            record = Record(traces, dt, offset, n_pts, triggered, time.monotonic())
            with self.lock:
                fmt, order = self.data_format, self.byte_order
            if fmt != "ASC":  # ready to send, as a scope holds its record in memory
                for source in traces:
                    self.encode(record, source, fmt, order)
            with self.lock:
                self.record = record
            return record

    def _tip_signal(self, ch: Channel, probe: Probe, t0: float, dt: float, n: int) -> np.ndarray:
        """Volts the channel reports before its filters and ADC (model signal x probe errors),
        float32 (ample for a 12-bit ADC, half the memory traffic of float64)."""
        if ch.coupling == "GND":
            return np.zeros(n, np.float32)
        with self.lock:
            # a probe that lags shows at scope time t what happened at t - skew
            wave = self.board.model.waveform(probe.net, t0 - probe.skew_s, dt, n)
        scale = (1.0 + probe.gain_error) * ch.attenuation / probe.ratio
        out = np.multiply(wave, scale, dtype=np.float32)
        if ch.coupling == "AC":
            out -= out.mean(dtype=np.float64)
        return out

    def _find_trigger(self, channels, probes, dt: float, rng) -> tuple[float, bool]:
        """Time of the first trigger-source crossing after a random phase, seconds.

        The crossing is searched on the noiseless probe signal over 2.5 PWM periods and
        interpolated linearly between search samples (an ideal trigger with hysteresis).
        With no crossing the scope triggers on its own (auto trigger): (start, False).
        """
        period = self.board.period_s
        start = float(rng.uniform(0.0, period))
        step = max(min(dt, period / 2000.0), period / 200_000.0)
        n = int(2.5 * period / step) + 2
        src = self.trigger_source
        s = self._tip_signal(channels[src], probes[src], start, step, n) - self.trigger_level_v
        if self.trigger_slope == "POS":
            hits = np.flatnonzero((s[:-1] < 0) & (s[1:] >= 0))
        else:
            hits = np.flatnonzero((s[:-1] > 0) & (s[1:] <= 0))
        if hits.size == 0:
            return start, False
        i = int(hits[0])
        frac = s[i] / (s[i] - s[i + 1])
        return start + (i + float(frac)) * step, True

    def _digitise(self, ch, probe, t0, dt, n, bits, rng) -> Trace:
        v = self._tip_signal(ch, probe, t0, dt, n)
        poles = [FULL_BANDWIDTH_HZ] + ([LIMIT_BANDWIDTH_HZ] if ch.bw_limit else [])
        for fc in poles:
            p = math.exp(-2.0 * math.pi * fc * dt)
            if p > 1e-9:  # a pole far above the sample rate changes nothing
                # start from the steady state of the first sample (no start-up transient)
                v = one_pole(np.asarray(v, dtype=np.float32), p)
        sigma = NOISE_FRACTION * ch.range_v
        if ch.bw_limit:
            sigma *= math.sqrt(LIMIT_BANDWIDTH_HZ / FULL_BANDWIDTH_HZ)
        lsb = ch.range_v / 2.0**bits
        # in place, in float32: x = (v - offset)/lsb + noise/lsb, rounded and clipped
        x = np.asarray(v, dtype=np.float32)
        x -= np.float32(ch.offset_v)
        x *= np.float32(1.0 / lsb)
        noise = rng.standard_normal(n, dtype=np.float32)
        noise *= np.float32(sigma / lsb)
        x += noise
        del noise
        lo, hi = -(2 ** (bits - 1)), 2 ** (bits - 1) - 1
        clipped = bool(x.min() <= lo - 0.5 or x.max() >= hi + 0.5)
        np.rint(x, out=x)
        np.clip(x, lo, hi, out=x)
        codes = x.astype(np.int16)
        return Trace(codes, None, lsb, ch.offset_v, bits, clipped)

    def current_record(self) -> Record:
        """The record data queries answer from (a running scope refreshes it first; a single
        shot under way is waited for: data handlers run without the instrument lock)."""
        thread = self.single_thread
        if thread is not None:
            thread.join()
        with self.lock:
            record, running = self.record, self.continuous
        if running and (
            record is None or time.monotonic() - record.wall_time > CONTINUOUS_REFRESH_S
        ):
            record = self.acquire()
        if record is None:
            raise ScpiError(-230, "no acquisition yet: send INITiate")
        return record

    # --- transfer ---------------------------------------------------------------------------
    def _trace(self, record: Record, source: str) -> Trace:
        if source not in record.traces:
            what = "math channel off or its channels off" if source == "MATH" else "channel off"
            raise ScpiError(-221, f"{source} not in the last record ({what})")
        return record.traces[source]

    def scaling(self, trace: Trace, fmt: str) -> tuple[float, float]:
        """(y_increment, y_origin) of ``trace`` in format ``fmt``: volts = code*inc + origin."""
        if fmt in ("REAL32", "ASC"):
            return 1.0, 0.0
        if trace.volts is not None:  # math: int16 steps over the full span, int8 256 steps
            return (
                (trace.lsb_v, trace.origin_v)
                if fmt == "INT16"
                else (trace.lsb_v * 256, trace.origin_v)
            )
        if fmt == "INT16":
            return trace.lsb_v / 2.0 ** (16 - trace.bits), trace.origin_v
        return trace.lsb_v * 2.0 ** (trace.bits - 8), trace.origin_v

    def encode(self, record: Record, source: str, fmt: str, order: str) -> bytes | np.ndarray:
        """The payload of ``TRACe? source``: a numpy array viewed as bytes, or ASCII bytes."""
        key = (source, fmt, order)
        cached = record.cache.get(key)
        if cached is not None:
            return cached
        trace = self._trace(record, source)
        endian = ">" if order == "NORM" else "<"
        if fmt == "ASC":
            out: bytes | np.ndarray = format_ascii(trace.as_volts())
        elif fmt == "REAL32":
            out = trace.as_volts().astype(f"{endian}f4").view(np.uint8)
        elif trace.volts is None:  # a channel: shift the ADC codes into the transfer width
            if fmt == "INT16":
                out = (trace.codes << (16 - trace.bits)).astype(f"{endian}i2").view(np.uint8)
            else:
                out = (trace.codes >> (trace.bits - 8)).astype(np.int8).view(np.uint8)
        else:  # math volts re-quantised to the span
            inc, origin = self.scaling(trace, fmt)
            lim = 32767 if fmt == "INT16" else 127
            q = np.clip(np.rint((trace.volts - origin) / inc), -lim - 1, lim)
            out = q.astype(f"{endian}i2" if fmt == "INT16" else np.int8).view(np.uint8)
        record.cache[key] = out
        return out

    # --- commands ---------------------------------------------------------------------------
    def build_commands(self, tree: CommandTree) -> None:
        """The dialect's own commands, then the simulation's (probes, board, faults)."""
        self.dialect.build(tree)
        self.build_sim_commands(tree)

    def build_native_commands(self, tree: CommandTree) -> None:
        """The native dialect (``NULLPOINT,SIMSCOPE-4``, sim_instruments/README.md), one
        subsystem at a time, in the order a header is matched."""
        self._native_input(tree)
        self._native_sweep(tree)
        self._native_trigger(tree)
        self._native_math(tree)
        self._native_transfer(tree)
        self._native_measure(tree)

    def _native_input(self, tree: CommandTree) -> None:
        """``INPut<n>`` and ``SENSe<n>:VOLTage:RANGe``: display, filter, coupling, probe and range."""
        ch = self.channels_or_reset

        def chan_bool(attr):
            def set_(s, p, n):
                setattr(ch(n[0]), attr, parse_bool(one_param(p)))

            return set_, lambda s, p, n: "1" if getattr(ch(n[0]), attr) else "0"

        def chan_num(attr, low, high):
            def set_(s, p, n):
                setattr(ch(n[0]), attr, parse_number(one_param(p), low, high))

            return set_, lambda s, p, n: format_nr3(getattr(ch(n[0]), attr))

        def coupling(s, p, n):
            ch(n[0]).coupling = parse_choice(one_param(p), ["AC", "DC", "GND"])

        for attr, pattern in (
            ("enabled", "INPut<n>[:STATe]"),
            ("bw_limit", "INPut<n>:FILTer:LPASs[:STATe]"),
        ):
            set_, get = chan_bool(attr)
            tree.add(pattern, set=set_, query=get)
        tree.add("INPut<n>:COUPling", set=coupling, query=lambda s, p, n: ch(n[0]).coupling)
        for attr, pattern, lo, hi in (
            ("attenuation", "INPut<n>:ATTenuation", 0.001, 10000.0),
            ("range_v", "[SENSe<n>:]VOLTage:RANGe:PTPeak", 1e-3, 1e5),
            ("offset_v", "[SENSe<n>:]VOLTage:RANGe:OFFSet", -1e5, 1e5),
        ):
            set_, get = chan_num(attr, lo, hi)
            tree.add(pattern, set=set_, query=get)

    def _native_sweep(self, tree: CommandTree) -> None:
        """``SENSe:SWEep`` (time, points, offset), the trigger level and the resolution."""

        def sweep(attr, low, high, integer=False):
            def set_(s, p, n):
                value = parse_number(one_param(p), low, high)
                setattr(self, attr, int(round(value)) if integer else value)

            def get(s, p, n):
                value = getattr(self, attr)
                return str(value) if integer else format_nr3(value)

            return set_, get

        for attr, pattern, lo, hi, integer in (
            ("sweep_time_s", "[SENSe:]SWEep:TIME", 1e-9, 100.0, False),
            ("points", "[SENSe:]SWEep:POINts", MIN_POINTS, MAX_POINTS, True),
            ("sweep_offset_s", "[SENSe:]SWEep:OFFSet:TIME", -100.0, 100.0, False),
            ("trigger_level_v", "TRIGger[:SEQuence]:LEVel", -1e5, 1e5, False),
        ):
            set_, get = sweep(attr, lo, hi, integer)
            tree.add(pattern, set=set_, query=get)
        tree.add(
            "[SENSe:]SWEep:TINTerval",
            query=lambda s, p, n: format_nr3(self.sweep_time_s / self.points),
        )
        tree.add(
            "[SENSe:]VOLTage:RESolution",
            set=lambda s, p, n: setattr(self, "resolution_bits", self._bits(p)),
            query=lambda s, p, n: str(self.resolution_bits),
        )

    def _native_trigger(self, tree: CommandTree) -> None:
        """``TRIGger`` source and slope, ``INITiate`` and ``ABORt``."""

        def trig_source(s, p, n):
            self.trigger_source = int(_source(one_param(p), math_ok=False)[2:])

        def trig_slope(s, p, n):
            self.trigger_slope = parse_choice(one_param(p), ["POSitive", "NEGative"])

        def initiate(s, p, n):
            no_params(p)
            self.acquire()

        def continuous(s, p, n):
            self.continuous = parse_bool(one_param(p))

        tree.add(
            "TRIGger[:SEQuence]:SOURce",
            set=trig_source,
            query=lambda s, p, n: f"CH{self.trigger_source}",
        )
        tree.add(
            "TRIGger[:SEQuence]:SLOPe", set=trig_slope, query=lambda s, p, n: self.trigger_slope
        )
        tree.add("INITiate[:IMMediate]", set=initiate, locked=False)
        tree.add(
            "INITiate:CONTinuous",
            set=continuous,
            query=lambda s, p, n: "1" if self.continuous else "0",
        )
        tree.add("ABORt", set=lambda s, p, n: setattr(self, "continuous", False))

    def _native_math(self, tree: CommandTree) -> None:
        """``CALCulate:MATH``: the one difference of two channels."""

        def math_expr(s, p, n):
            text = unquote(one_param(p)).replace(" ", "").upper()
            parts = text.split("-")
            if len(parts) != 2:
                raise ScpiError(-224, f'expected "CH<a>-CH<b>", got {text!r}')
            a, b = (int(_source(x, math_ok=False)[2:]) for x in parts)
            self.math_expr = (a, b)

        tree.add(
            "CALCulate:MATH:EXPRession",
            set=math_expr,
            query=lambda s, p, n: '"CH{}-CH{}"'.format(*self.math_expr),
        )
        tree.add(
            "CALCulate:MATH:STATe",
            set=lambda s, p, n: setattr(self, "math_on", parse_bool(one_param(p))),
            query=lambda s, p, n: "1" if self.math_on else "0",
        )

    def _native_transfer(self, tree: CommandTree) -> None:
        """``FORMat`` and ``TRACe``: the record's transfer and its preamble."""

        def data_format(s, p, n):
            if not p or len(p) > 2:
                raise ScpiError(-109 if not p else -108)
            kind = parse_choice(p[0], ["ASCii", "INTeger", "REAL"])
            width = int(parse_number(p[1])) if len(p) == 2 else {"INT": 8, "REAL": 32}.get(kind, 0)
            allowed = {"ASC": (0,), "INT": (8, 16), "REAL": (32,)}[kind]
            if width not in allowed and not (kind == "ASC" and len(p) == 1):
                raise ScpiError(-224, f"{kind},{width} is not offered")
            self.data_format = {"ASC": "ASC", "INT": f"INT{width}", "REAL": "REAL32"}[kind]

        def format_query(s, p, n):
            names = {"ASC": "ASC", "INT8": "INT,8", "INT16": "INT,16", "REAL32": "REAL,32"}
            return names[self.data_format]

        def border(s, p, n):
            self.byte_order = parse_choice(one_param(p), ["NORMal", "SWAPped"])

        def trace_data(s, p, n):
            source = _source(one_param(p))
            record = self.current_record()
            payload = self.encode(record, source, self.data_format, self.byte_order)
            return payload if self.data_format == "ASC" else Block(payload)

        def preamble(s, p, n):
            source = _source(one_param(p))
            record = self.current_record()
            inc, origin = self.scaling(self._trace(record, source), self.data_format)
            nums = (record.x_increment, record.x_origin, inc, origin)
            return ",".join([str(record.points), *(format_nr3(x) for x in nums)])

        tree.add("FORMat[:DATA]", set=data_format, query=format_query)
        tree.add("FORMat:BORDer", set=border, query=lambda s, p, n: self.byte_order)
        tree.add("TRACe[:DATA]", query=trace_data, locked=False)
        tree.add("TRACe:PREamble", query=preamble, locked=False)

    def _native_measure(self, tree: CommandTree) -> None:
        """``MEASure:VOLTage``: the mean and the peak-to-peak."""

        def measure(kind):
            return lambda s, p, n: self.measure(_source(one_param(p)), kind)

        tree.add("MEASure:VOLTage[:DC]", query=measure("DC"), locked=False)
        tree.add("MEASure:VOLTage:PTPeak", query=measure("PTP"), locked=False)

    def build_sim_commands(self, tree: CommandTree) -> None:
        """``SIMulation:PROBe<n>:...``, the board and the fault commands: every dialect."""
        ch = self.channels_or_reset

        def probe_net(s, p, n):
            net = parse_choice(one_param(p), NETS).lower()
            probe = self._probe(n[0])
            if net not in getattr(self.board.model, "nets", NETS_OF_STAGE):
                raise ScpiError(-221, f"{net.upper()}: this board has no such net")
            if probe.kind == "SING" and net in FLOATING_NETS:
                raise ScpiError(
                    -221, f"{net.upper()} floats: a single-ended probe's ground lead would short it"
                )
            if (probe.kind == "CURR") != (net in CURRENT_NETS):
                what = (
                    "a current needs a current probe"
                    if net in CURRENT_NETS
                    else ("a current probe measures a current, not a voltage")
                )
                raise ScpiError(-221, f"{net.upper()}: {what} (SIMulation:PROBe{n[0]}:TYPE)")
            probe.net = net

        def probe_type(s, p, n):
            probe = self._probe(n[0])
            kind = parse_choice(one_param(p), ["SINGle", "DIFFerential", "CURRent"])
            if kind == "SING" and probe.net in FLOATING_NETS:
                raise ScpiError(-221, f"probe {n[0]} sits on floating net {probe.net.upper()}")
            # another kind of probe swapped in: NET puts it where it belongs
            probe.kind, probe.gain_error = kind, self._gain_for(n[0], kind)
            probe.skew_s = _skew(kind)

        def probe_ratio(s, p, n):
            ratio = parse_number(one_param(p), 0.001, 10000.0)
            self._probe(n[0]).ratio = ratio
            ch(n[0]).attenuation = ratio  # the probe's ratio is sensed, as by a probe interface

        tree.add(
            "SIMulation:PROBe<n>:NET",
            set=probe_net,
            query=lambda s, p, n: self._probe(n[0]).net.upper(),
        )
        tree.add(
            "SIMulation:PROBe<n>:TYPE",
            set=probe_type,
            query=lambda s, p, n: self._probe(n[0]).kind,
        )
        tree.add(
            "SIMulation:PROBe<n>:RATio",
            set=probe_ratio,
            query=lambda s, p, n: format_nr3(self._probe(n[0]).ratio),
        )
        tree.add(
            "SIMulation:PROBe<n>:GERRor",
            query=lambda s, p, n: format_nr3(self._probe(n[0]).gain_error),
        )
        add_board_commands(tree, self.board)
        add_fault_commands(tree, self.faults)

    def measure(self, source: str, kind: str) -> str:
        """The scope's own measurement of the last record of ``source`` (``"DC"`` mean or
        ``"PTP"`` peak-to-peak, volts) as NR3; 9.9E37 when clipped (or the fault is armed)."""
        if self.faults.overrange:
            return format_nr3(OVERRANGE)
        record = self.current_record()
        trace = self._trace(record, source)
        if trace.clipped:
            return format_nr3(OVERRANGE)
        key = ("measure", source, kind)
        if key not in record.cache:  # once per record, as a scope measures each acquisition
            record.cache[key] = self._measure(trace, kind)
        return record.cache[key]

    @staticmethod
    def _measure(trace: Trace, kind: str) -> str:
        if trace.codes is not None:
            c = trace.codes
            if kind == "DC":
                return format_nr3(float(c.mean(dtype=np.float64)) * trace.lsb_v + trace.origin_v)
            return format_nr3(float(int(c.max()) - int(c.min())) * trace.lsb_v)
        v = trace.volts
        return format_nr3(
            float(v.mean(dtype=np.float64)) if kind == "DC" else float(v.max() - v.min())
        )

    def channels_or_reset(self, n: int) -> Channel:
        """Channel ``n`` (1-4); -114 for another suffix."""
        if n not in CHANNELS:
            raise ScpiError(-114, f"channel {n} (the scope has 1 to 4)")
        return self.channels[n]

    def _probe(self, n: int) -> Probe:
        if n not in CHANNELS:
            raise ScpiError(-114, f"probe {n} (the scope has 1 to 4)")
        return self.probes[n]

    @staticmethod
    def _bits(params: list[str]) -> int:
        bits = int(parse_number(one_param(params)))
        if bits not in (8, 12):
            raise ScpiError(-224, f"resolution {bits} bits: 8 or 12")
        return bits


# Block length of ``one_pole``: each block is one row of a matrix product (BLAS), so the
# recursion runs over n / 32 block ends instead of n samples.
_POLE_BLOCK = 32


def _skew(kind: str) -> float:
    """A probe's delay behind a passive voltage probe (s): only the current probe lags."""
    return CURRENT_PROBE_SKEW_S if kind == "CURR" else 0.0


def one_pole(x: np.ndarray, p: float) -> np.ndarray:
    """A first-order low-pass, ``y[k] = p*y[k-1] + (1 - p)*x[k]`` with ``y[-1] = x[0]`` (the
    steady state of the first sample), in float32: the bilinear-free discrete pole
    ``p = exp(-2*pi*fc*dt)`` of an RC front end (what ``scipy.signal.lfilter([1 - p], [1, -p],
    x, zi=p*x[0])`` computes; a test keeps the two equal)."""
    u = np.multiply(x, np.float32(1.0 - p), dtype=np.float32)
    return _recurrence(u, p, float(x[0]) if x.size else 0.0)


def _recurrence(u: np.ndarray, a: float, y_before: float) -> np.ndarray:
    """``y[k] = a*y[k-1] + u[k]``, ``y[-1] = y_before``, vectorised in blocks: within a block
    from a zero state, ``u`` times the Toeplitz matrix of powers of ``a`` (one matrix
    product); the block ends follow the same recurrence with ``a**L`` (solved recursively);
    then each block adds its start state times ``a**(j+1)``."""
    n = u.size
    size = _POLE_BLOCK
    if n < 4 * size:
        y = np.empty(n, dtype=np.float32)
        state = y_before
        for k in range(n):
            state = a * state + float(u[k])
            y[k] = state
        return y
    m = n - n % size
    j = np.arange(size)
    lag = j[None, :] - j[:, None]
    powers = np.where(lag >= 0, a ** np.maximum(lag, 0).astype(np.float64), 0.0)
    y = np.empty(n, dtype=np.float32)
    blocks = y[:m].reshape(-1, size)
    np.matmul(u[:m].reshape(-1, size), powers.astype(np.float32), out=blocks)
    ends = _recurrence(np.ascontiguousarray(blocks[:, -1]), a**size, y_before)
    starts = np.concatenate([[y_before], ends[:-1]]).astype(np.float32)
    rise = (a ** (j + 1.0)).astype(np.float32)
    rows = 1 << 14  # a few hundred kB of temporary at a time
    for r in range(0, blocks.shape[0], rows):
        blocks[r : r + rows] += starts[r : r + rows, None] * rise
    if m < n:
        y[m:] = _recurrence(u[m:], a, float(ends[-1]))
    return y
