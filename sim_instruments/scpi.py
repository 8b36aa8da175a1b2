"""The SCPI engine of the simulated instruments: command tree, parser, error queue, 488.2 status.

Syntax per SCPI-99 vol. 1 ch. 6 and IEEE 488.2 ch. 7: a header is a chain of mnemonics joined
by ``:``, each matched in its short form (the upper-case part of the pattern) or its long form,
case-insensitive; ``[...]`` nodes may be omitted; ``<n>`` nodes take a numeric suffix (omitted =
1); ``?`` marks a query; several program message units on one line are separated by ``;`` and a
unit without a leading ``:`` is relative to the previous unit's path (SCPI-99 6.2.4); ``*`` common
commands leave the path alone. Parameters follow the header after white space, separated by
commas; quoted strings keep their commas and semicolons.

An instrument subclasses ``Instrument`` and registers handlers in ``build_commands``; one
``Session`` per client connection owns that client's error queue and event status register,
and every handler runs under the instrument's lock.
"""

from __future__ import annotations

import re
import socket
import threading
from collections import deque
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Protocol

__all__ = [
    "ERROR_TEXTS",
    "Block",
    "CommandFaults",
    "CommandTree",
    "Instrument",
    "ScpiError",
    "Session",
    "format_nr3",
    "parse_bool",
    "parse_choice",
    "parse_number",
]

#: Standard error numbers and texts, SCPI-99 vol. 2 ch. 21.8 ("Error/Event Queue").
ERROR_TEXTS: dict[int, str] = {
    0: "No error",
    -100: "Command error",
    -101: "Invalid character",
    -102: "Syntax error",
    -103: "Invalid separator",
    -104: "Data type error",
    -108: "Parameter not allowed",
    -109: "Missing parameter",
    -113: "Undefined header",
    -114: "Header suffix out of range",
    -120: "Numeric data error",
    -131: "Invalid suffix",
    -150: "String data error",
    -200: "Execution error",
    -221: "Settings conflict",
    -222: "Data out of range",
    -224: "Illegal parameter value",
    -230: "Data corrupt or stale",
    -300: "Device-specific error",
    -310: "System error",
    -350: "Queue overflow",
    -400: "Query error",
    -410: "Query INTERRUPTED",
    -420: "Query UNTERMINATED",
    -430: "Query DEADLOCKED",
    -440: "Query UNTERMINATED after indefinite response",
}

#: Depth of each session's error queue; the last slot reports -350 (SCPI-99 vol. 2 21.8.3).
QUEUE_DEPTH = 16

#: How many program messages an instrument keeps in ``Instrument.received`` (oldest dropped).
RECEIVED_LOG_LINES = 10_000

# Standard event status register bits (IEEE 488.2 11.5.1).
ESR_OPC, ESR_QYE, ESR_DDE, ESR_EXE, ESR_CME = 1, 4, 8, 16, 32


def error_text(code: int) -> str:
    """Standard text for ``code``; device-defined (positive) codes get a generic text."""
    if code in ERROR_TEXTS:
        return ERROR_TEXTS[code]
    if code > 0:
        return "Device-defined error"
    return ERROR_TEXTS.get(code // 10 * 10, ERROR_TEXTS.get(code // 100 * 100, "Error"))


class ScpiError(Exception):
    """A command failed: ``code`` is the SCPI error number, ``info`` the device-dependent detail."""

    def __init__(self, code: int, info: str = "") -> None:
        super().__init__(f"{code} {error_text(code)} {info}".strip())
        self.code = code
        self.info = info


@dataclass(frozen=True)
class Block:
    """A binary reply: sent as the IEEE 488.2 definite-length block ``#<n><len><payload>``.

    ``payload`` is any buffer (bytes, or a numpy array's memoryview) so that the server sends
    it without copying (488.2 8.7.9).
    """

    payload: bytes | memoryview
    prefix: bytes = b""  # an echoed response header before the block (``:CURVE ``)

    @property
    def nbytes(self) -> int:
        return memoryview(self.payload).nbytes

    def header(self) -> bytes:
        digits = str(self.nbytes)
        return self.prefix + f"#{len(digits)}{digits}".encode()


#: What a query answers: response text, a binary block, or bytes already formatted as response
#: data (a long ASCII waveform) that go out as they are.
Reply = str | Block | bytes
Handler = Callable[["Session", list[str], list[int]], Reply | None]


# --- parameter parsing -----------------------------------------------------------------------


def parse_number(text: str, low: float | None = None, high: float | None = None) -> float:
    """Read a decimal numeric program data element (488.2 7.7.2) as a float.

    ``MINimum``/``MAXimum`` map to the bounds when given. Out of [low, high] -> -222.
    """
    word = text.strip().upper()
    if word in ("MIN", "MINIMUM") and low is not None:
        return low
    if word in ("MAX", "MAXIMUM") and high is not None:
        return high
    try:
        value = float(word)
    except ValueError:
        raise ScpiError(-104, f"not a number: {text.strip()!r}") from None
    if value != value or value in (float("inf"), float("-inf")):
        raise ScpiError(-120, f"not a finite number: {text.strip()!r}")
    if (low is not None and value < low) or (high is not None and value > high):
        lo = "-inf" if low is None else f"{low:g}"
        hi = "inf" if high is None else f"{high:g}"
        raise ScpiError(-222, f"{value:g} outside {lo} to {hi}")
    return value


def parse_bool(text: str) -> bool:
    """``ON|OFF|1|0`` (SCPI-99 vol. 1 7.3); also any number, non-zero = ON (488.2 7.7.2)."""
    word = text.strip().upper()
    if word == "ON":
        return True
    if word == "OFF":
        return False
    try:
        return round(float(word)) != 0
    except ValueError:
        raise ScpiError(-224, f"expected ON|OFF|1|0, got {text.strip()!r}") from None


def parse_choice(text: str, choices: Sequence[str]) -> str:
    """Match a character program data element against mnemonics like ``"POSitive"``.

    Returns the short form (upper-case part) of the matching choice; -224 if none matches.
    """
    word = text.strip().upper()
    for choice in choices:
        if word in (_short(choice), choice.upper()):
            return _short(choice)
    raise ScpiError(-224, f"expected one of {'|'.join(choices)}, got {text.strip()!r}")


def unquote(text: str) -> str:
    """The content of a string program data element (``"..."`` or ``'...'``, 488.2 7.7.5)."""
    t = text.strip()
    if len(t) >= 2 and t[0] == t[-1] and t[0] in "\"'":
        return t[1:-1].replace(t[0] * 2, t[0])
    raise ScpiError(-150, f"expected a quoted string, got {t!r}")


def format_nr3(value: float) -> str:
    """A float as NR3 (488.2 8.7.4), e.g. ``2.400000000E+01``."""
    return f"{float(value):.9E}"


# --- the command tree ----------------------------------------------------------------------

_NODE_RE = re.compile(r"^([A-Za-z*][A-Za-z0-9_]*?)(<n>)?$")


def _short(mnemonic: str) -> str:
    """The short form: the upper-case letters (and digits) of a mnemonic written as ``VOLTage``."""
    if mnemonic.startswith("*"):
        return mnemonic.upper()
    # underscores belong to the mnemonic (IEEE 488.2 7.6.1: letters, digits and "_")
    return "".join(c for c in mnemonic if c.isupper() or c.isdigit() or c == "_")


@dataclass
class _Node:
    short: str
    long: str
    optional: bool
    numbered: bool

    def matches(self, token: str) -> int | None:
        """The suffix (1 if omitted) when ``token`` names this node, else None."""
        word = token.upper()
        head, digits = word, ""
        if self.numbered:
            m = re.match(r"^(.*?)(\d+)$", word)
            if m and m.group(1) in (self.short, self.long):
                head, digits = m.group(1), m.group(2)
        if head not in (self.short, self.long):
            return None
        return int(digits) if digits else 1


def _compile(pattern: str) -> list[_Node]:
    """``"[SOURce:]VOLTage[:LEVel]"`` -> nodes. Brackets enclose exactly one optional node."""
    nodes: list[_Node] = []
    for match in re.finditer(r"\[:?([^\]:]+):?\]|:?([^\[\]:]+)", pattern):
        optional = match.group(1) is not None
        text = match.group(1) or match.group(2)
        m = _NODE_RE.match(text)
        if not m:
            raise ValueError(f"bad pattern node {text!r} in {pattern!r}")
        name = m.group(1)
        nodes.append(_Node(_short(name), name.upper(), optional, bool(m.group(2))))
    return nodes


@dataclass
class _Entry:
    pattern: str
    nodes: list[_Node]
    set_handler: Handler | None = None
    query_handler: Handler | None = None
    locked: bool = True


@dataclass
class CommandTree:
    """The headers an instrument understands, each with a set and/or a query handler.

    A handler is called as ``handler(session, params, suffixes)``: ``params`` the raw parameter
    strings, ``suffixes`` the numeric suffixes of the header's numbered nodes, in order.
    """

    entries: list[_Entry] = field(default_factory=list)
    _found: dict = field(default_factory=dict, repr=False)

    def add(
        self,
        pattern: str,
        set: Handler | None = None,
        query: Handler | None = None,
        locked: bool = True,
    ) -> None:
        """Register ``pattern``; ``locked=False`` handlers take the instrument lock themselves
        (a long acquisition must not hold the bench's lock while it computes)."""
        self.entries.append(_Entry(pattern, _compile(pattern), set, query, locked))
        self._found.clear()

    def lookup(self, tokens: list[str]) -> tuple[_Entry, list[int]] | None:
        """The first entry whose pattern spells ``tokens``, with its suffixes (or None).

        Remembered per spelling (upper-cased): a header sent again, such as a paged read's
        ``:WAVeform:STARt``, is not matched against every pattern again."""
        key = tuple(t.upper() for t in tokens)
        if key in self._found:
            found = self._found[key]
            return (found[0], list(found[1])) if found is not None else None
        result = None
        for entry in self.entries:
            suffixes = _match(entry.nodes, tokens)
            if suffixes is not None:
                result = entry, suffixes
                break
        if len(self._found) < 4096:  # bounded: headers are few, typos could be many
            self._found[key] = (result[0], tuple(result[1])) if result is not None else None
        return result


def _match(nodes: list[_Node], tokens: list[str]) -> list[int] | None:
    """Suffixes if ``tokens`` spell ``nodes`` (optional nodes may be skipped), else None."""
    if not tokens:
        return [1 for n in nodes if n.numbered] if all(n.optional for n in nodes) else None
    if not nodes:
        return None
    node = nodes[0]
    suffix = node.matches(tokens[0])
    if suffix is not None:
        rest = _match(nodes[1:], tokens[1:])
        if rest is not None:
            return ([suffix] if node.numbered else []) + rest
    if node.optional:
        rest = _match(nodes[1:], tokens)
        if rest is not None:
            return ([1] if node.numbered else []) + rest
    return None


def split_units(line: str) -> list[str]:
    """Split a program message at ``;`` outside quoted strings."""
    units, start, quote = [], 0, ""
    for i, c in enumerate(line):
        if quote:
            if c == quote:
                quote = ""
        elif c in "\"'":
            quote = c
        elif c == ";":
            units.append(line[start:i])
            start = i + 1
    if quote:
        raise ScpiError(-150, "unterminated string")
    units.append(line[start:])
    return [u.strip() for u in units]


def split_params(text: str) -> list[str]:
    """Split program data at ``,`` outside quoted strings; empty text -> []."""
    if not text.strip():
        return []
    params, start, quote = [], 0, ""
    for i, c in enumerate(text):
        if quote:
            if c == quote:
                quote = ""
        elif c in "\"'":
            quote = c
        elif c == ",":
            params.append(text[start:i].strip())
            start = i + 1
    params.append(text[start:].strip())
    if any(p == "" for p in params):
        raise ScpiError(-103, "empty parameter between commas")
    return params


_HEADER_RE = re.compile(r"^(:?[A-Za-z*][A-Za-z0-9_:]*)(\?)?(?:\s+(.*))?$", re.DOTALL)


# --- instruments and sessions -------------------------------------------------------------------


class CommandFaults(Protocol):
    """What the engine and the server ask of an instrument's fault injector
    (``faults.FaultInjector`` is one).

    Declared here, beside its one caller, so that the engine depends on no fault module: the
    fault injector builds on the engine (``Block``, ``Session``), never the other way round.
    """

    @property
    def overrange(self) -> bool:
        """True while measurements must answer the SCPI overrange value."""
        ...

    def deliver_pending_errors(self, session: Session) -> None:
        """Push errors armed from outside into ``session`` before it runs a command."""
        ...

    def send_reply(
        self, sock: socket.socket, replies: Sequence[Reply], stop: threading.Event
    ) -> bool:
        """Send one program message's replies (the faults armed act on them); False = close."""
        ...


class Instrument:
    """Base of the simulated instruments: identity, lock, faults, the 488.2 common commands.

    Subclasses set ``model_name`` and extend ``build_commands``. ``lock`` guards the
    instrument's state (and, shared across a bench, the physical model). ``received`` logs
    every program message (line) any client sent, in arrival order, as received (stripped),
    the last ``RECEIVED_LOG_LINES`` of them: tests check what was sent, and in which order
    (``received_lines()`` copies it safely while clients are still sending).
    """

    model_name = "SIMINSTRUMENT"
    firmware = "0.1.0-sim"

    def __init__(self, serial: str, lock: threading.RLock, faults: CommandFaults) -> None:
        self.serial = serial
        self.lock = lock
        self.faults = faults
        self.received: deque[str] = deque(maxlen=RECEIVED_LOG_LINES)
        self._received_lock = threading.Lock()
        self.tree = CommandTree()
        self._add_common()
        self.build_commands(self.tree)
        self.sessions: list[Session] = []

    # Subclasses override these two.
    def build_commands(self, tree: CommandTree) -> None:
        """Register the instrument's own headers."""

    def reset(self) -> None:
        """``*RST``: the instrument's defaults (IEEE 488.2 10.32)."""

    def pending(self) -> bool:
        """True while an operation started by a command is still running (for ``*OPC?``)."""
        return False

    def wait_pending(self, timeout_s: float | None = None) -> bool:
        """Block until no operation is pending; False on timeout."""
        return True

    def log_received(self, line: str) -> None:
        """Append one program message to ``received`` (the oldest drops out when full)."""
        with self._received_lock:
            self.received.append(line)

    def received_lines(self) -> list[str]:
        """A copy of ``received``, oldest first."""
        with self._received_lock:
            return list(self.received)

    def new_session(self) -> Session:
        session = Session(self)
        with self.lock:
            self.sessions.append(session)
        return session

    def close_session(self, session: Session) -> None:
        with self.lock:
            if session in self.sessions:
                self.sessions.remove(session)

    def _add_common(self) -> None:
        t = self.tree
        t.add(
            "*IDN",
            query=lambda s, p, n: f"NULLPOINT,{self.model_name},{self.serial},{self.firmware}",
        )
        t.add("*RST", set=lambda s, p, n: self.reset())
        t.add("*CLS", set=lambda s, p, n: s.clear_status())
        t.add("*OPC", set=lambda s, p, n: s.set_opc(), query=lambda s, p, n: s.opc_query())
        t.add("*WAI", set=lambda s, p, n: s.wait_operations())
        t.add("*ESR", query=lambda s, p, n: str(s.read_esr()))
        t.add("*ESE", set=lambda s, p, n: s.set_ese(p), query=lambda s, p, n: str(s.ese))
        t.add("*STB", query=lambda s, p, n: str(s.status_byte()))
        t.add("*TST", query=lambda s, p, n: "0")
        t.add("SYSTem:ERRor[:NEXT]", query=lambda s, p, n: s.next_error())
        t.add("SYSTem:ERRor:COUNt", query=lambda s, p, n: str(len(s.errors)))
        t.add("SYSTem:VERSion", query=lambda s, p, n: "1999.0")


class Session:
    """One client's view of an instrument: its error queue, event status and parser path."""

    def __init__(self, instrument: Instrument) -> None:
        self.instrument = instrument
        self.errors: deque[tuple[int, str]] = deque()
        self.esr = 0
        self.ese = 0
        self._path: list[str] = []

    # --- status -------------------------------------------------------------------------
    def push_error(self, code: int, info: str = "") -> None:
        """Queue an error (SCPI-99 vol. 2 21.8) and set its event status bit (488.2 11.5.1)."""
        if -199 <= code <= -100:
            self.esr |= ESR_CME
        elif -299 <= code <= -200:
            self.esr |= ESR_EXE
        elif -499 <= code <= -400:
            self.esr |= ESR_QYE
        elif code != 0:
            self.esr |= ESR_DDE
        text = error_text(code) + (f";{info}" if info else "")
        if len(self.errors) >= QUEUE_DEPTH - 1:
            if len(self.errors) == QUEUE_DEPTH - 1:
                self.errors.append((-350, ERROR_TEXTS[-350]))
            return
        self.errors.append((code, text))

    def next_error(self) -> str:
        code, text = self.errors.popleft() if self.errors else (0, ERROR_TEXTS[0])
        return f'{code},"{text}"'

    def clear_status(self) -> None:
        self.errors.clear()
        self.esr = 0

    def read_esr(self) -> int:
        value, self.esr = self.esr, 0
        return value

    def set_ese(self, params: list[str]) -> None:
        self.ese = int(parse_number(_one(params), 0, 255))

    def status_byte(self) -> int:
        """STB: bit 2 error/event queue not empty (SCPI-99 vol. 1 9.1), bit 5 ESB (488.2 11.2)."""
        stb = 4 if self.errors else 0
        if self.esr & self.ese:
            stb |= 32
        return stb

    def set_opc(self) -> None:
        self.wait_operations()
        self.esr |= ESR_OPC

    def opc_query(self) -> str:
        self.wait_operations()
        return "1"

    def wait_operations(self) -> None:
        self.instrument.wait_pending()

    # --- execution -----------------------------------------------------------------------
    def execute(self, line: str) -> list[Reply]:
        """Run one program message (a line) and return the replies of its queries, in order."""
        self.instrument.log_received(line)
        self.instrument.faults.deliver_pending_errors(self)
        self._path = []  # each program message starts at the root (SCPI-99 6.2.4)
        try:
            units = split_units(line)
        except ScpiError as exc:
            self.push_error(exc.code, exc.info)
            return []
        replies: list[Reply] = []
        for unit in units:
            if not unit:
                if len(units) > 1:
                    self.push_error(-102, "empty command between semicolons")
                continue
            try:
                reply = self._execute_unit(unit)
            except ScpiError as exc:
                self.push_error(exc.code, exc.info)
                continue
            except Exception as exc:  # a fault inside the simulation: report it, keep serving
                self.push_error(-300, f"{type(exc).__name__}: {exc}"[:200])
                continue
            if reply is not None:
                replies.append(reply)
        return replies

    def _execute_unit(self, unit: str) -> Reply | None:
        m = _HEADER_RE.match(unit)
        if not m:
            raise ScpiError(-102, f"cannot read {unit!r}")
        header, is_query, rest = m.group(1), bool(m.group(2)), m.group(3) or ""
        params = split_params(rest)
        if header.startswith("*"):
            tokens = [header]
            candidates = [tokens]
        else:
            absolute = header.startswith(":")
            tokens = [t for t in header.lstrip(":").split(":")]
            if any(t == "" for t in tokens):
                raise ScpiError(-102, f"empty node in {header!r}")
            candidates = [tokens] if absolute or not self._path else [self._path + tokens, tokens]
        found = None
        for cand in candidates:
            hit = self.instrument.tree.lookup(cand)
            if hit is None:
                continue
            handler = hit[0].query_handler if is_query else hit[0].set_handler
            if found is None or handler is not None:
                found, tokens = hit, cand
            if handler is not None:
                break
        if found is None:
            raise ScpiError(-113, header + ("?" if is_query else ""))
        entry, suffixes = found
        if not header.startswith("*"):
            self._path = tokens[:-1]
        handler = entry.query_handler if is_query else entry.set_handler
        if handler is None:
            if is_query:
                raise ScpiError(-113, f"{header} is a command only, not a query")
            raise ScpiError(-113, f"{header} is a query only (add ?)")
        if entry.locked:
            with self.instrument.lock:
                reply = handler(self, params, suffixes)
        else:
            reply = handler(self, params, suffixes)
        if is_query and reply is None:
            raise ScpiError(-400, f"{header}? gave no reply")
        if not is_query and reply is not None:
            return None
        return reply


def _one(params: list[str]) -> str:
    """The single parameter of a command: -109 if missing, -108 if more than one."""
    if not params:
        raise ScpiError(-109)
    if len(params) > 1:
        raise ScpiError(-108, f"one parameter expected, got {len(params)}")
    return params[0]


def one_param(params: list[str]) -> str:
    """Public form of the single-parameter check (see ``_one``)."""
    return _one(params)


def no_params(params: list[str]) -> None:
    """A command or query that takes no parameter: -108 if one is given."""
    if params:
        raise ScpiError(-108, f"no parameter expected, got {params[0]!r}")
