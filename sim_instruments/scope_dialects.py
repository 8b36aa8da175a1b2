"""The simulated scope's dialects: the same front end and record, spoken in the command sets
of three scope families, so that the profiles written for those families are tried end to end.

- ``nullpoint``: our own SCPI-99-style tree (``NULLPOINT,SIMSCOPE-4``, sim_instruments/README.md).
- ``tenfield``: a family with a ten-field comma-separated ``:WAVeform:PREamble?`` (format,
  type, points, count, xincrement, xorigin, xreference, yincrement, yorigin, yreference),
  unsigned byte codes read as volts = (code - yorigin - yreference) x yincrement, at most
  250 000 points per ``:WAVeform:DATA?`` (``:WAVeform:STARt``/``STOP`` pages), single shots by
  ``:SINGle`` and completion seen by ``:TRIGger:STATus?`` reading ``STOP``; 8 vertical and 12
  horizontal divisions; ``:CHANnel<n>:OFFSet`` moves the trace (the centre reads -offset);
  bandwidth limit ``20M``/``OFF`` (``NULLPOINT,SIMSCOPE-TENFIELD``).
- ``outpre``: a family with a ``;``-separated ``WFMOutpre?`` whose quoted ``WFID`` holds commas,
  ``CURVe?`` blocks, volts = (code - YOFF) x YMULT + YZERO, time = XZERO + XINCR x (n - PT_OFF),
  ``DATa:STARt``/``STOP``, headers echoed in replies (``HEADer ON``, the default here), the
  probe set as a gain (1/ratio), a trigger level per source, vertical position in divisions,
  single sequences by ``ACQuire:STATE RUN`` (``ACQuire:STATE?`` reads 0 when done), errors by
  the event status register and ``EVMsg?`` (``NULLPOINT,SIMSCOPE-OUTPRE``).

Only the commands the shipped profiles of each family use are served; the manuals of the real
families have many more. The identities are our own: the simulated bench is no real product.
"""

from __future__ import annotations

import threading

import numpy as np

from sim_instruments.clock import SharedBoard
from sim_instruments.faults import FaultInjector
from sim_instruments.scope import OwnDialect, Record, Scope
from sim_instruments.scpi import (
    Block,
    CommandTree,
    ScpiError,
    format_nr3,
    no_params,
    one_param,
    parse_bool,
    parse_choice,
    parse_number,
    unquote,
)

__all__ = ["DIALECTS", "scope_speaking"]


class Dialect(OwnDialect):
    """Base of the other families' dialects: single shots that run while the scope answers."""

    # single-shot acquisitions that run while the instrument keeps answering
    def start_single(self) -> None:
        scope = self.scope
        with scope.lock:
            running = scope.single_thread
            if running is not None and running.is_alive():
                return
            thread = threading.Thread(target=self._acquire_quietly, daemon=True)
            scope.single_thread = thread
        thread.start()

    def _acquire_quietly(self) -> None:
        try:
            self.scope.acquire()
        except Exception:  # noqa: BLE001 (a failed acquisition leaves the old record, as a scope does)
            pass

    def single_running(self) -> bool:
        thread = self.scope.single_thread
        return thread is not None and thread.is_alive()


def _channel_word(text: str, prefixes: tuple[str, ...], math_ok: bool = True) -> str:
    """``CHANnel2``/``CH2`` -> ``"CH2"``; ``MATH`` -> ``"MATH"``; else -224."""
    word = text.strip().strip('"').upper()
    if math_ok and word in ("MATH", "MATH1"):
        return "MATH"
    for head in prefixes:
        if word.startswith(head) and word[len(head) :].isdigit():
            n = int(word[len(head) :])
            if 1 <= n <= 4:
                return f"CH{n}"
    raise ScpiError(-224, f"not a source: {text!r}")


class Tenfield(Dialect):
    """The ten-field preamble family (see the module doc)."""

    model_name = "SIMSCOPE-TENFIELD"
    VERTICAL_DIVS = 8
    HORIZONTAL_DIVS = 12
    MAX_BYTE_POINTS = 250_000
    Y_REFERENCE = 127

    def __init__(self, scope: Scope) -> None:
        super().__init__(scope)
        self.source = "CH1"
        self.start, self.stop = 1, 1200
        self.fmt = "BYTE"

    def _codes(self, record: Record, source: str) -> np.ndarray:
        """Unsigned bytes: the 8-bit ADC code + 128 (the scope's byte format)."""
        key = (source, "TENFIELD-BYTE")
        cached = record.cache.get(key)
        if cached is None:
            signed = self.scope.encode(record, source, "INT8", "NORM")
            cached = np.bitwise_xor(np.asarray(signed, dtype=np.uint8), np.uint8(0x80))
            record.cache[key] = cached
        return cached

    def build(self, tree: CommandTree) -> None:
        """The command table, one subsystem at a time, in the order a header is matched."""
        self._add_channel(tree)
        self._add_timebase(tree)
        self._add_trigger(tree)
        self._add_math(tree)
        self._add_waveform(tree)
        self._add_measure(tree)

    def _add_channel(self, tree: CommandTree) -> None:
        """``:CHANnel<n>``: display, coupling, bandwidth, probe, scale and offset."""
        ch = self.scope.channels_or_reset

        def chan_number(attr, convert, back):
            def set_(s, p, n):
                setattr(ch(n[0]), attr, convert(parse_number(one_param(p))))

            return set_, lambda s, p, n: format_nr3(back(getattr(ch(n[0]), attr)))

        tree.add(
            ":CHANnel<n>:DISPlay",
            set=lambda s, p, n: setattr(ch(n[0]), "enabled", parse_bool(one_param(p))),
            query=lambda s, p, n: "1" if ch(n[0]).enabled else "0",
        )
        tree.add(
            ":CHANnel<n>:COUPling",
            set=lambda s, p, n: setattr(
                ch(n[0]), "coupling", parse_choice(one_param(p), ["AC", "DC", "GND"])
            ),
            query=lambda s, p, n: ch(n[0]).coupling,
        )
        tree.add(
            ":CHANnel<n>:BWLimit",
            set=lambda s, p, n: setattr(
                ch(n[0]), "bw_limit", parse_choice(one_param(p), ["20M", "OFF"]) == "20M"
            ),
            query=lambda s, p, n: "20M" if ch(n[0]).bw_limit else "OFF",
        )
        divs = self.VERTICAL_DIVS
        set_, get = chan_number("attenuation", lambda v: v, lambda v: v)
        tree.add(":CHANnel<n>:PROBe", set=set_, query=get)
        set_, get = chan_number("range_v", lambda v: v * divs, lambda v: v / divs)
        tree.add(":CHANnel<n>:SCALe", set=set_, query=get)
        # the offset moves the trace up: the screen's centre then reads -offset
        set_, get = chan_number("offset_v", lambda v: -v, lambda v: -v)
        tree.add(":CHANnel<n>:OFFSet", set=set_, query=get)

    def _add_timebase(self, tree: CommandTree) -> None:
        """``:TIMebase`` (the centre kept when the scale changes) and ``:ACQuire:MDEPth``."""
        scope = self.scope

        def timebase_scale(s, p, n):
            centre = scope.sweep_offset_s + scope.sweep_time_s / 2
            scope.sweep_time_s = parse_number(one_param(p), 1e-9, 50.0) * self.HORIZONTAL_DIVS
            scope.sweep_offset_s = centre - scope.sweep_time_s / 2

        def timebase_offset(s, p, n):
            centre = parse_number(one_param(p), -100.0, 100.0)
            scope.sweep_offset_s = centre - scope.sweep_time_s / 2

        tree.add(
            ":TIMebase[:MAIN]:SCALe",
            set=timebase_scale,
            query=lambda s, p, n: format_nr3(scope.sweep_time_s / self.HORIZONTAL_DIVS),
        )
        tree.add(
            ":TIMebase[:MAIN]:OFFSet",
            set=timebase_offset,
            query=lambda s, p, n: format_nr3(scope.sweep_offset_s + scope.sweep_time_s / 2),
        )
        tree.add(
            ":ACQuire:MDEPth",
            set=lambda s, p, n: setattr(
                scope, "points", int(parse_number(one_param(p), 1000, 20_000_000))
            ),
            query=lambda s, p, n: str(scope.points),
        )

    def _add_trigger(self, tree: CommandTree) -> None:
        """``:TRIGger:EDGe``, ``:SINGle``/``:STOP`` and ``:TRIGger:STATus``."""
        scope = self.scope
        src = ("CHANNEL", "CHAN")
        tree.add(
            ":TRIGger:EDGe:SOURce",
            set=lambda s, p, n: setattr(
                scope, "trigger_source", int(_channel_word(one_param(p), src, False)[2:])
            ),
            query=lambda s, p, n: f"CHAN{scope.trigger_source}",
        )
        tree.add(
            ":TRIGger:EDGe:LEVel",
            set=lambda s, p, n: setattr(
                scope, "trigger_level_v", parse_number(one_param(p), -1e5, 1e5)
            ),
            query=lambda s, p, n: format_nr3(scope.trigger_level_v),
        )
        tree.add(
            ":TRIGger:EDGe:SLOPe",
            set=lambda s, p, n: setattr(
                scope, "trigger_slope", parse_choice(one_param(p), ["POSitive", "NEGative"])
            ),
            query=lambda s, p, n: scope.trigger_slope,
        )

        def single(s, p, n):
            no_params(p)
            self.start_single()

        tree.add(":SINGle", set=single, locked=False)
        tree.add(":STOP", set=lambda s, p, n: setattr(scope, "continuous", False))
        tree.add(
            ":TRIGger:STATus",
            query=lambda s, p, n: "WAIT" if self.single_running() else "STOP",
            locked=False,
        )

    def _add_math(self, tree: CommandTree) -> None:
        """``:MATH``: the one difference the profiles use."""
        scope = self.scope
        src = ("CHANNEL", "CHAN")

        def math_source(index):
            def set_(s, p, n):
                a, b = scope.math_expr
                chosen = int(_channel_word(one_param(p), src, False)[2:])
                scope.math_expr = (chosen, b) if index == 1 else (a, chosen)

            return set_

        tree.add(":MATH:SOURce1", set=math_source(1))
        tree.add(":MATH:SOURce2", set=math_source(2))
        tree.add(
            ":MATH:OPERator",
            set=lambda s, p, n: parse_choice(one_param(p), ["SUBTract"]),
            query=lambda s, p, n: "SUBT",
        )
        tree.add(
            ":MATH:DISPlay",
            set=lambda s, p, n: setattr(scope, "math_on", parse_bool(one_param(p))),
            query=lambda s, p, n: "1" if scope.math_on else "0",
        )

    def _add_waveform(self, tree: CommandTree) -> None:
        """``:WAVeform``: source, format, pages, preamble and data."""
        scope = self.scope
        src = ("CHANNEL", "CHAN")
        tree.add(
            ":WAVeform:SOURce",
            set=lambda s, p, n: setattr(self, "source", _channel_word(one_param(p), src)),
            query=lambda s, p, n: self.source.replace("CH", "CHAN"),
        )
        tree.add(
            ":WAVeform:MODE",
            set=lambda s, p, n: parse_choice(one_param(p), ["NORMal", "MAXimum", "RAW"]),
            query=lambda s, p, n: "RAW",
        )
        tree.add(
            ":WAVeform:FORMat",
            set=lambda s, p, n: setattr(self, "fmt", parse_choice(one_param(p), ["BYTE"])),
            query=lambda s, p, n: self.fmt,
        )
        for name in ("STARt", "STOP"):
            attr = name.lower()
            tree.add(
                f":WAVeform:{name}",
                set=lambda s, p, n, a=attr: setattr(
                    self, a, int(parse_number(one_param(p), 1, 20_000_000))
                ),
                query=lambda s, p, n, a=attr: str(getattr(self, a)),
            )

        def preamble(s, p, n):
            no_params(p)
            record = scope.current_record()
            trace = scope._trace(record, self.source)
            inc, origin = scope.scaling(trace, "INT8")
            # volts = (u - yorigin - yreference) * inc with u = code + 128
            y_origin = 128 - self.Y_REFERENCE - origin / inc
            nums = [0, 2, record.points, 1]
            floats = [record.x_increment, record.x_origin]
            tail = [format_nr3(inc), format_nr3(y_origin), str(self.Y_REFERENCE)]
            return ",".join([*map(str, nums), *map(format_nr3, floats), "0", *tail])

        def data(s, p, n):
            no_params(p)
            record = scope.current_record()
            codes = self._codes(record, self.source)
            first, last = self.start, min(self.stop, record.points)
            if last - first + 1 > self.MAX_BYTE_POINTS:
                raise ScpiError(
                    -222, f"at most {self.MAX_BYTE_POINTS} points per read in BYTE format"
                )
            if first > last:
                raise ScpiError(-222, f"start {first} after stop {last}")
            return Block(memoryview(codes)[first - 1 : last])

        tree.add(":WAVeform:PREamble", query=preamble, locked=False)
        tree.add(":WAVeform:DATA", query=data, locked=False)

    def _add_measure(self, tree: CommandTree) -> None:
        """``:MEASure:ITEM``: the mean and the peak-to-peak."""
        scope = self.scope
        src = ("CHANNEL", "CHAN")

        def measure_item(s, p, n):
            if len(p) != 2:
                raise ScpiError(-109, "item and source")
            item = parse_choice(p[0], ["VAVG", "VPP"])
            source = _channel_word(p[1], src)
            return scope.measure(source, "DC" if item == "VAVG" else "PTP")

        tree.add(":MEASure:ITEM", query=measure_item, locked=False)


class Outpre(Dialect):
    """The output-preamble family (see the module doc)."""

    model_name = "SIMSCOPE-OUTPRE"
    VERTICAL_DIVS = 8
    HORIZONTAL_DIVS = 10

    def __init__(self, scope: Scope) -> None:
        super().__init__(scope)
        self.header = True
        self.source = "CH1"
        self.encoding, self.width = "RIB", 1
        self.start, self.stop = 1, 10_000
        self.levels: dict[int, float] = {}
        self.offsets: dict[int, float] = {}
        self.positions: dict[int, float] = {}
        self.measure_source, self.measure_type = "CH1", "MEAN"

    def _answer(self, header: str, value: str) -> str:
        return f":{header} {value}" if self.header else value

    def _centre(self, n: int) -> None:
        """The screen centre's volts from the offset (volts) and the position (divisions)."""
        ch = self.scope.channels_or_reset(n)
        scale = ch.range_v / self.VERTICAL_DIVS
        ch.offset_v = self.offsets.get(n, 0.0) - self.positions.get(n, 0.0) * scale

    def _codes(self, record: Record, source: str) -> np.ndarray:
        key = (source, "OUTPRE", self.encoding, self.width)
        cached = record.cache.get(key)
        if cached is None:
            order = "SWAP" if self.encoding.startswith("S") else "NORM"
            fmt = "INT16" if self.width == 2 else "INT8"
            signed = np.asarray(self.scope.encode(record, source, fmt, order), dtype=np.uint8)
            if self.encoding in ("RPB", "SRP"):  # positive integers: the top bit flipped
                signed = signed.copy()
                top = (self.width - 1) if order == "SWAP" else 0  # the high byte
                signed[top :: self.width] ^= np.uint8(0x80)
            cached = signed
            record.cache[key] = cached
        return cached

    def _scale(self, record: Record, source: str) -> tuple[float, float, float]:
        """(YMULT, YOFF, YZERO) for ``source`` in the current width."""
        scope = self.scope
        trace = scope._trace(record, source)
        inc, origin = scope.scaling(trace, "INT16" if self.width == 2 else "INT8")
        if source == "MATH":
            return inc, 0.0, origin
        n = int(source[2:])
        offset = self.offsets.get(n, 0.0)
        # volts = code * inc + origin = (code - yoff) * inc + offset
        y_off = (offset - origin) / inc
        unsigned = self.encoding in ("RPB", "SRP")
        if unsigned:
            y_off += 128 if self.width == 1 else 32768
        return inc, y_off, offset

    def build(self, tree: CommandTree) -> None:
        """The command table, one subsystem at a time, in the order a header is matched."""
        self._add_header(tree)
        self._add_select(tree)
        self._add_vertical(tree)
        self._add_horizontal(tree)
        self._add_trigger_acquire(tree)
        self._add_math(tree)
        self._add_data(tree)
        self._add_measurement(tree)

    def _add_header(self, tree: CommandTree) -> None:
        """``HEADer`` (replies echo their header) and ``VERBose``."""
        answer = self._answer

        def header(s, p, n):
            self.header = parse_bool(one_param(p))

        tree.add(
            "HEADer",
            set=header,
            query=lambda s, p, n: answer("HEADER", "1" if self.header else "0"),
        )
        tree.add("VERBose", set=lambda s, p, n: parse_bool(one_param(p)))

    def _add_select(self, tree: CommandTree) -> None:
        """``SELect``: which channels and the math trace are shown."""
        scope = self.scope
        ch = scope.channels_or_reset
        answer = self._answer
        tree.add(
            "SELect:CH<n>",
            set=lambda s, p, n: setattr(ch(n[0]), "enabled", parse_bool(one_param(p))),
            query=lambda s, p, n: answer(f"SELECT:CH{n[0]}", "1" if ch(n[0]).enabled else "0"),
        )
        tree.add(
            "SELect:MATH",
            set=lambda s, p, n: setattr(scope, "math_on", parse_bool(one_param(p))),
            query=lambda s, p, n: answer("SELECT:MATH", "1" if scope.math_on else "0"),
        )

    def _add_vertical(self, tree: CommandTree) -> None:
        """``CH<n>``: coupling, bandwidth, probe gain, scale, offset and position."""
        ch = self.scope.channels_or_reset
        divs = self.VERTICAL_DIVS
        answer = self._answer
        tree.add(
            "CH<n>:COUPling",
            set=lambda s, p, n: setattr(
                ch(n[0]), "coupling", parse_choice(one_param(p), ["AC", "DC", "GND"])
            ),
            query=lambda s, p, n: answer(f"CH{n[0]}:COUPLING", ch(n[0]).coupling),
        )

        def bandwidth(s, p, n):
            word = one_param(p).strip().upper()
            if word in ("TWE", "TWENTY"):
                ch(n[0]).bw_limit = True
            elif word in ("FUL", "FULL"):
                ch(n[0]).bw_limit = False
            else:
                ch(n[0]).bw_limit = parse_number(word, 1e6, 1e10) <= 20e6

        tree.add(
            "CH<n>:BANdwidth",
            set=bandwidth,
            query=lambda s, p, n: answer(
                f"CH{n[0]}:BANDWIDTH", format_nr3(20e6 if ch(n[0]).bw_limit else 350e6)
            ),
        )

        def gain(s, p, n):
            ch(n[0]).attenuation = 1.0 / parse_number(one_param(p), 1e-4, 1e3)

        tree.add(
            "CH<n>:PRObe:GAIN",
            set=gain,
            query=lambda s, p, n: answer(
                f"CH{n[0]}:PROBE:GAIN", format_nr3(1.0 / ch(n[0]).attenuation)
            ),
        )

        def scale(s, p, n):
            ch(n[0]).range_v = parse_number(one_param(p), 1e-4, 1e4) * divs
            self._centre(n[0])

        def offset(s, p, n):
            self.offsets[n[0]] = parse_number(one_param(p), -1e5, 1e5)
            self._centre(n[0])

        def position(s, p, n):
            self.positions[n[0]] = parse_number(one_param(p), -5.0, 5.0)
            self._centre(n[0])

        tree.add(
            "CH<n>:SCAle",
            set=scale,
            query=lambda s, p, n: answer(f"CH{n[0]}:SCALE", format_nr3(ch(n[0]).range_v / divs)),
        )
        tree.add(
            "CH<n>:OFFSet",
            set=offset,
            query=lambda s, p, n: answer(
                f"CH{n[0]}:OFFSET", format_nr3(self.offsets.get(n[0], 0.0))
            ),
        )
        tree.add(
            "CH<n>:POSition",
            set=position,
            query=lambda s, p, n: answer(
                f"CH{n[0]}:POSITION", format_nr3(self.positions.get(n[0], 0.0))
            ),
        )

    def _add_horizontal(self, tree: CommandTree) -> None:
        """``HORizontal``: scale (the trigger's percent kept), position, record length."""
        scope = self.scope
        answer = self._answer

        def h_scale(s, p, n):
            percent = -100.0 * scope.sweep_offset_s / scope.sweep_time_s
            scope.sweep_time_s = parse_number(one_param(p), 1e-9, 100.0) * self.HORIZONTAL_DIVS
            scope.sweep_offset_s = -percent / 100.0 * scope.sweep_time_s

        def h_position(s, p, n):
            percent = parse_number(one_param(p), 0.0, 100.0)
            scope.sweep_offset_s = -percent / 100.0 * scope.sweep_time_s

        tree.add(
            "HORizontal:SCAle",
            set=h_scale,
            query=lambda s, p, n: answer(
                "HORIZONTAL:SCALE", format_nr3(scope.sweep_time_s / self.HORIZONTAL_DIVS)
            ),
        )
        tree.add(
            "HORizontal:POSition",
            set=h_position,
            query=lambda s, p, n: answer(
                "HORIZONTAL:POSITION",
                format_nr3(-100.0 * scope.sweep_offset_s / scope.sweep_time_s),
            ),
        )
        tree.add(
            "HORizontal:RECOrdlength",
            set=lambda s, p, n: setattr(
                scope, "points", int(parse_number(one_param(p), 1000, 20_000_000))
            ),
            query=lambda s, p, n: answer("HORIZONTAL:RECORDLENGTH", str(scope.points)),
        )
        tree.add("HORizontal:DELay:MODe", set=lambda s, p, n: parse_bool(one_param(p)))

    def _add_trigger_acquire(self, tree: CommandTree) -> None:
        """``TRIGger:A`` (a level per source) and ``ACQuire`` (single sequences)."""
        scope = self.scope
        src = ("CH",)
        answer = self._answer

        def trig_source(s, p, n):
            scope.trigger_source = int(_channel_word(one_param(p), src, False)[2:])
            scope.trigger_level_v = self.levels.get(scope.trigger_source, 0.0)

        def trig_level(s, p, n):
            self.levels[n[0]] = parse_number(one_param(p), -1e5, 1e5)
            if n[0] == scope.trigger_source:
                scope.trigger_level_v = self.levels[n[0]]

        tree.add(
            "TRIGger:A:EDGE:SOUrce",
            set=trig_source,
            query=lambda s, p, n: answer("TRIGGER:A:EDGE:SOURCE", f"CH{scope.trigger_source}"),
        )
        tree.add(
            "TRIGger:A:LEVel:CH<n>",
            set=trig_level,
            query=lambda s, p, n: answer(
                f"TRIGGER:A:LEVEL:CH{n[0]}", format_nr3(self.levels.get(n[0], 0.0))
            ),
        )

        def slope(s, p, n):
            word = parse_choice(one_param(p), ["RISe", "FALL"])
            scope.trigger_slope = "POS" if word == "RIS" else "NEG"

        tree.add(
            "TRIGger:A:EDGE:SLOpe",
            set=slope,
            query=lambda s, p, n: answer(
                "TRIGGER:A:EDGE:SLOPE", "RISE" if scope.trigger_slope == "POS" else "FALL"
            ),
        )
        tree.add(
            "ACQuire:STOPAfter",
            set=lambda s, p, n: parse_choice(one_param(p), ["SEQuence", "RUNSTop"]),
        )

        def acq_state(s, p, n):
            word = one_param(p).strip().upper()
            if word in ("RUN", "ON", "1"):
                self.start_single()
            elif word not in ("STOP", "OFF", "0"):
                raise ScpiError(-224, f"expected RUN|STOP, got {word!r}")

        tree.add(
            "ACQuire:STATE",
            set=acq_state,
            query=lambda s, p, n: answer("ACQUIRE:STATE", "1" if self.single_running() else "0"),
            locked=False,
        )

    def _add_math(self, tree: CommandTree) -> None:
        """``MATH:DEFine``: the one difference the profiles use."""
        scope = self.scope
        src = ("CH",)

        def math_define(s, p, n):
            text = unquote(one_param(p)).replace(" ", "").upper()
            parts = text.split("-")
            if len(parts) != 2:
                raise ScpiError(-224, f'expected "CH<a>-CH<b>", got {text!r}')
            a, b = (int(_channel_word(x, src, False)[2:]) for x in parts)
            scope.math_expr = (a, b)

        tree.add("MATH:DEFine", set=math_define)

    def _add_data(self, tree: CommandTree) -> None:
        """``DATa``, ``WFMOutpre`` and ``CURVe``: the record's transfer."""
        src = ("CH",)
        answer = self._answer
        tree.add(
            "DATa:SOUrce",
            set=lambda s, p, n: setattr(self, "source", _channel_word(one_param(p), src)),
            query=lambda s, p, n: answer("DATA:SOURCE", self.source),
        )
        tree.add(
            "DATa:ENCdg",
            set=lambda s, p, n: setattr(
                self,
                "encoding",
                parse_choice(one_param(p), ["RIBinary", "RPBinary", "SRIbinary", "SRPbinary"]),
            ),
            query=lambda s, p, n: answer("DATA:ENCDG", self.encoding),
        )
        tree.add(
            "DATa:WIDth",
            set=lambda s, p, n: setattr(self, "width", int(parse_number(one_param(p), 1, 2))),
            query=lambda s, p, n: answer("DATA:WIDTH", str(self.width)),
        )
        for name in ("STARt", "STOP"):
            attr = name.lower()
            tree.add(
                f"DATa:{name}",
                set=lambda s, p, n, a=attr: setattr(
                    self, a, int(parse_number(one_param(p), 1, 1e9))
                ),
                query=lambda s, p, n, a=attr: answer(f"DATA:{a.upper()}", str(getattr(self, a))),
            )
        tree.add("WFMOutpre", query=lambda s, p, n: self._preamble(p), locked=False)
        tree.add("CURVe", query=lambda s, p, n: self._curve(p), locked=False)

    def _add_measurement(self, tree: CommandTree) -> None:
        """``MEASUrement:IMMed`` and the event queue's ``EVMsg``."""
        scope = self.scope
        src = ("CH",)
        answer = self._answer
        tree.add(
            "MEASUrement:IMMed:SOUrce<n>",
            set=lambda s, p, n: setattr(self, "measure_source", _channel_word(one_param(p), src)),
        )
        tree.add(
            "MEASUrement:IMMed:TYPe",
            set=lambda s, p, n: setattr(
                self, "measure_type", parse_choice(one_param(p), ["MEAN", "PK2pk"])
            ),
        )
        tree.add(
            "MEASUrement:IMMed:VALue",
            query=lambda s, p, n: answer(
                "MEASUREMENT:IMMED:VALUE",
                scope.measure(self.measure_source, "DC" if self.measure_type == "MEAN" else "PTP"),
            ),
            locked=False,
        )
        tree.add("EVMsg", query=lambda s, p, n: answer("EVMSG", self._event(s)))

    @staticmethod
    def _event(session) -> str:
        """The oldest event: ``<code>,"<text>"`` (and it leaves the queue)."""
        if not session.errors:
            return '1,"No events to report - queue empty"'
        code, text = session.errors.popleft()
        return f'{code},"{text}"'

    def _window(self, record: Record) -> tuple[int, int]:
        first = max(1, self.start)
        last = min(max(self.stop, first), record.points)
        return first, last

    def _preamble(self, params: list[str]) -> str:
        no_params(params)
        scope = self.scope
        record = scope.current_record()
        first, last = self._window(record)
        y_mult, y_off, y_zero = self._scale(record, self.source)
        signed = self.encoding in ("RIB", "SRI")
        little = self.encoding.startswith("S")
        if self.source == "MATH":
            info = "Math, 1.000V/div"
        else:
            c = scope.channels_or_reset(int(self.source[2:]))
            info = f"Ch{self.source[2:]}, {c.coupling} coupling, {c.range_v / self.VERTICAL_DIVS:.4g}V/div"
        wfid = (
            f'"{info}, {record.x_increment * record.points / self.HORIZONTAL_DIVS:.4g}s/div, '
            f'{record.points} points, Sample mode"'
        )
        fields = [
            ("BYT_NR", str(self.width)),
            ("BIT_NR", str(8 * self.width)),
            ("ENCDG", "BINARY"),
            ("BN_FMT", "RI" if signed else "RP"),
            ("BYT_OR", "LSB" if little else "MSB"),
            ("WFID", wfid),
            ("NR_PT", str(last - first + 1)),
            ("PT_FMT", "Y"),
            ("PT_ORDER", "LINEAR"),
            ("XUNIT", '"s"'),
            ("XINCR", format_nr3(record.x_increment)),
            ("XZERO", format_nr3(record.x_origin + (first - 1) * record.x_increment)),
            ("PT_OFF", "0"),
            ("YUNIT", '"V"'),
            ("YMULT", format_nr3(y_mult)),
            ("YOFF", format_nr3(y_off)),
            ("YZERO", format_nr3(y_zero)),
        ]
        if self.header:
            text = ";".join(f"{k} {v}" for k, v in fields)
            return ":WFMOUTPRE:" + text
        return ";".join(v for _, v in fields)

    def _curve(self, params: list[str]) -> Block:
        no_params(params)
        record = self.scope.current_record()
        codes = self._codes(record, self.source)
        first, last = self._window(record)
        w = self.width
        return Block(
            memoryview(codes)[(first - 1) * w : last * w],
            prefix=b":CURVE " if self.header else b"",
        )


DIALECTS: dict[str, type[OwnDialect]] = {
    "nullpoint": OwnDialect,
    "tenfield": Tenfield,
    "outpre": Outpre,
}


def scope_speaking(dialect: str) -> type[Scope]:
    """The simulated scope class that speaks ``dialect`` (``DIALECTS``): the bench builds every
    instrument as ``cls(serial, board, faults, seed)``."""
    chosen = DIALECTS[dialect]

    class DialectScope(Scope):
        def __init__(self, serial: str, board: SharedBoard, faults: FaultInjector, seed: int):
            super().__init__(serial, board, faults, seed, dialect=chosen)

    DialectScope.__name__ = DialectScope.__qualname__ = f"Scope_{dialect}"
    return DialectScope
