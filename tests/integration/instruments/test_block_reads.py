"""Binary block reads and reply faults over a real loopback socket with scripted replies.

The block layout is IEEE 488.2 8.7.9 (definite length ``#<n><len><bytes>``) and 8.7.10
(indefinite ``#0<bytes><terminator>``) [read: REFERENCES.md section 7]; numpy's own
``frombuffer``/``astype`` with explicit byte order is the reference decoder.
"""

from __future__ import annotations

import numpy as np
import pytest

from bringup.instruments import faults
from bringup.instruments.profiles import find_profile
from bringup.instruments.visa import InstrumentSession

IDN = b"NULLPOINT,SIMSCOPE-4,T0001,1.0\n"


def _codes(n: int, seed: int = 1) -> np.ndarray:
    """A noisy, quantised, ringing step as int16 codes, with 0x0A bytes forced in."""
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    step = np.where(t > n // 3, 20000.0, -3000.0)
    ring = 1500 * np.exp(-(t - n // 3).clip(0) / 40) * np.sin(t / 3.0) * (t > n // 3)
    codes = np.round(step + ring + rng.normal(0, 60, n)).astype(np.int16)
    codes[5] = 0x0A0A  # both bytes are the terminator character
    codes[6] = 0x000A
    return codes


def _definite(payload: bytes) -> bytes:
    digits = str(len(payload)).encode()
    return b"#" + str(len(digits)).encode() + digits + payload + b"\n"


#: The timeout (ms) given to the one call of a test that is expected to time out; every other
#: exchange keeps the sim-scope profile's own timeouts (3 s and more).
SHORT_MS = 400


def _session(resource: str, fast: bool) -> InstrumentSession:
    session = InstrumentSession("scope", resource, find_profile("sim-scope"), fast_reads=fast)
    session.open()
    return session


@pytest.mark.parametrize("fast", [True, False], ids=["socket-wire", "resource-wire"])
@pytest.mark.parametrize("order", [">", "<"])
def test_definite_block_with_terminator_bytes_inside_keeps_the_session_in_sync(
    scripted_server, fast, order
):
    codes = _codes(50_000)
    payload = codes.astype(f"{order}i2").tobytes()
    assert b"\n" in payload
    server = scripted_server(lambda line, n: _definite(payload) if line == "TRAC? CH1" else IDN)
    session = _session(server.resource, fast)
    try:
        got = session.query_block("TRAC? CH1", f"{order}i2")
        assert got.dtype == np.dtype("=i2")  # native order, ready for maths and storage
        np.testing.assert_array_equal(got, np.frombuffer(payload, dtype=f"{order}i2"))
        # the terminator after the block was consumed: the next reply is the next answer
        assert session.query("*IDN?") == IDN.decode().strip()
    finally:
        session.close()


def test_indefinite_block_ends_at_the_final_terminator(scripted_server):
    codes = _codes(4001, seed=2)
    payload = codes.astype(">i2").tobytes()
    assert payload.count(b"\n") >= 2
    server = scripted_server(
        lambda line, n: b"#0" + payload + b"\n" if line.startswith("TRAC") else IDN
    )
    session = _session(server.resource, True)
    try:
        got = session.query_block("TRAC? CH1", ">i2")
        np.testing.assert_array_equal(got, codes)
        assert session.query("*IDN?").startswith("NULLPOINT,SIMSCOPE-4")
    finally:
        session.close()


@pytest.mark.parametrize("fast", [True, False], ids=["socket-wire", "resource-wire"])
def test_block_cut_short_is_a_truncated_block_and_the_next_query_works(scripted_server, fast):
    payload = _codes(1000).astype(">i2").tobytes()

    def reply(line, n):
        if line.startswith("TRAC"):
            return _definite(payload)[: 2 + 4 + 700]  # header then 700 of 2000 bytes, no end
        return IDN

    server = scripted_server(reply)
    session = _session(server.resource, fast)
    try:
        with pytest.raises(
            faults.TruncatedBlock, match=r"scope after 'TRAC\? CH1': .*cut short"
        ) as info:
            session.query_block("TRAC? CH1", ">i2", timeout_ms=2 * SHORT_MS)
        if fast:
            assert "700 of 2000" in str(info.value)
        assert session.query("*IDN?").startswith("NULLPOINT")
        assert session.reconnects == 1
    finally:
        session.close()


def test_garbage_instead_of_a_block_is_a_garbled_reply(scripted_server):
    server = scripted_server(
        lambda line, n: b"\x8f#~\xfe?NUL\n" if line.startswith("TRAC") else IDN
    )
    session = _session(server.resource, True)
    try:
        with pytest.raises(faults.GarbageReply, match="expected a #-block"):
            session.query_block("TRAC? CH1", ">i2")
        assert session.query("*IDN?").startswith("NULLPOINT")
    finally:
        session.close()


def test_block_whose_length_disagrees_with_its_terminator_is_garbled(scripted_server):
    payload = b"\x00\x01" * 10
    bad = b"#220" + payload + b"XY\n"  # two bytes too many before the terminator
    server = scripted_server(lambda line, n: bad if line.startswith("TRAC") else IDN)
    session = _session(server.resource, True)
    try:
        with pytest.raises(faults.GarbageReply):
            session.query_block("TRAC? CH1", ">i2")
        assert session.query("*IDN?").startswith("NULLPOINT")
    finally:
        session.close()


def test_dropped_reply_to_a_safe_query_is_retried_once_after_reconnect(scripted_server):
    payload = _codes(3000).astype(">i2").tobytes()

    def reply(line, n):
        if line.startswith("TRAC"):
            whole = _definite(payload)
            return [whole[:1000], "close"] if n == 1 else whole
        return IDN

    server = scripted_server(reply)
    session = _session(server.resource, True)
    try:
        got = session.query_block("TRAC? CH1", ">i2")
        np.testing.assert_array_equal(got, np.frombuffer(payload, ">i2"))
        assert (session.retries, session.reconnects, server.connections) == (1, 1, 2)
    finally:
        session.close()


def test_state_changing_command_is_never_resent(scripted_server):
    # the error query after a command is not repeatable: a drop there is reported, not retried
    def reply(line, n):
        if line == "SYST:ERR?":
            return [b'0,"No', "close"]
        return None

    server = scripted_server(reply)
    session = _session(server.resource, True)
    try:
        with pytest.raises(
            faults.ConnectionLost, match=r"scope after 'INIT; SYST:ERR\?': connection lost"
        ):
            session.configure("arm")
        assert server.received.count("INIT") == 1
        assert session.retries == 0
    finally:
        session.close()


def test_silence_is_a_timeout_naming_the_command(scripted_server):
    server = scripted_server(lambda line, n: "hang")
    session = _session(server.resource, True)
    try:
        with pytest.raises(
            faults.InstrumentTimeout,
            match=rf"scope after '\*IDN\?': no reply in time: nothing within {SHORT_MS} ms",
        ):
            session.query("*IDN?", timeout_ms=SHORT_MS)
        assert session.retries == 1  # *IDN? is safe to repeat: tried on a second connection
    finally:
        session.close()


def test_refused_connection_is_connection_lost():
    import socket

    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()  # nothing listens on this port now
    session = InstrumentSession(
        "scope", f"TCPIP::127.0.0.1::{port}::SOCKET", find_profile("sim-scope")
    )
    with pytest.raises(faults.ConnectionLost, match="cannot open"):
        session.open()
        session.query("*IDN?")


def test_a_reply_that_stops_midway_says_how_much_came(scripted_server):
    server = scripted_server(lambda line, n: [b"NULLPOINT,SIM", "hang"])
    session = _session(server.resource, True)
    try:
        with pytest.raises(
            faults.InstrumentTimeout,
            match=f"13 bytes of a reply, then nothing within {SHORT_MS} ms",
        ):
            session.query("*IDN?", timeout_ms=SHORT_MS)
    finally:
        session.close()
