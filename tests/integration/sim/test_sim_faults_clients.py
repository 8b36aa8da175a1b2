"""Fault injection and several clients at once, through real PyVISA sessions.

What a client sees is what a misbehaving LAN instrument does: a late reply is a VISA timeout
(VI_ERROR_TMO) and arrives later, shifting replies until the client clears; a dropped
connection ends the read early; garbage does not read as a number; a truncated block leaves
the client short of the announced count; 9.9E37 is the overrange reply [read: shared
references §7]. Several clients on one raw-socket instrument each keep their own error queue
(common practice for LAN instruments, no source).

Only the one call that must time out gets a short VISA timeout (``_timed_out``); every
reply that should arrive is waited for with the connections' 3 s, so load cannot fail them.
After a timed-out query its late reply is read and checked explicitly: left in the socket, it
would be taken for the next query's answer.
"""

from __future__ import annotations

import threading

import numpy as np
import pytest
from pyvisa import VisaIOError, constants

from sim_instruments.faults import GARBAGE_REPLY

SHORT_MS = 150  # the one call expected to time out; every delay below is well beyond it


def _timed_out(inst, command: str) -> None:
    """``command`` must time out: run it alone with a short timeout, then restore the normal one."""
    normal, inst.timeout = inst.timeout, SHORT_MS
    try:
        with pytest.raises(VisaIOError) as err:
            inst.query(command)
    finally:
        inst.timeout = normal
    assert err.value.error_code == constants.StatusCode.error_timeout


def test_delay_beyond_the_timeout_then_recovery(bench, connect):
    supply = connect(bench, "supply")
    bench.supply.faults.inject("delay", seconds=0.4, once=True)
    _timed_out(supply, "*IDN?")
    late = supply.read()  # the late reply still arrives: it would shift the next query's answer
    assert late.startswith("NULLPOINT,SIMSUPPLY-60")
    assert supply.query("OUTP?") == "0"  # once: the fault is gone


def test_delay_from_scpi_is_persistent_until_cleared(bench, connect):
    meter = connect(bench, "thermometer")
    meter.write("SIM:FAUL:DEL 0.4")
    _timed_out(meter, "*IDN?")
    assert meter.read().startswith("NULLPOINT,SIMTHERM-1,")  # the late reply, out of the way
    assert meter.query("SIM:FAUL?") == '"delay"'  # still armed (this reply came late too)
    meter.write("SIM:FAUL:CLE")
    assert meter.query("SIM:FAUL?") == '""'


def test_drop_closes_the_connection_mid_reply(bench, connect, visa_rm):
    scope = connect(bench, "scope")
    scope.write("SIM:FAUL:DROP ONCE")
    with pytest.raises(VisaIOError):
        reply = scope.query("*IDN?")  # half a reply, then the connection is gone
        scope.timeout = SHORT_MS  # nothing can answer on the dead connection: do not wait long
        scope.query("*IDN?")
        pytest.fail(f"connection survived a drop (got {reply!r})")
    again = connect(bench, "scope")  # a new connection works
    assert again.query("*IDN?").startswith("NULLPOINT,SIMSCOPE-4")


def test_garbage_reply_does_not_read_as_a_number(bench, connect):
    supply = connect(bench, "supply")
    bench.supply.faults.inject("garbage")
    supply.write("MEAS:VOLT?")
    raw = supply.read_raw()
    assert raw == GARBAGE_REPLY
    with pytest.raises(ValueError):
        float(raw.decode("latin-1"))
    assert float(supply.query("MEAS:VOLT?")) == pytest.approx(0.0, abs=0.01)


def test_truncated_block_leaves_the_client_short(bench, connect):
    supply = connect(bench, "supply")
    supply.write("VOLT 24;OUTP ON")
    assert supply.query("OUTP?") == "1"
    scope = connect(bench, "scope", timeout_ms=5000)
    scope.write("SIM:PWM ON;FORM INT,16;INIT")
    scope.query("*OPC?")
    scope.write("SIM:FAUL:TRUN ONCE")
    scope.write("TRAC? CH2")
    head = scope.read_bytes(2)
    count = int(scope.read_bytes(int(head[1:2])))
    assert count == 20000  # 10,000 points of int16
    scope.timeout = 300  # only the read that must come up short
    try:
        with pytest.raises(VisaIOError):
            scope.read_bytes(count, break_on_termchar=False)
    finally:
        scope.timeout = 5000
    scope.clear()  # what a client must do after a timeout
    payload = scope.query_binary_values(
        "TRAC? CH2", datatype="h", is_big_endian=True, container=np.array
    )
    assert payload.size == 10000


def test_overrange_and_injected_errors(bench, connect):
    supply = connect(bench, "supply")
    scope = connect(bench, "scope")
    meter = connect(bench, "thermometer")
    bench.supply.faults.inject("overrange")
    meter.write("SIM:FAUL:OVER ON")
    assert float(supply.query("MEAS:CURR?")) == 9.9e37
    assert float(meter.query("MEAS:TEMP?")) == 9.9e37
    assert meter.query("SIM:FAUL:OVER?") == "1"
    bench.supply.faults.clear()
    assert float(supply.query("MEAS:CURR?")) == 0.0
    bench.scope.faults.inject("error", code=-410)
    assert scope.query("SYST:ERR?") == '-410,"Query INTERRUPTED;injected"'
    scope.write("SIM:FAUL:ERR -420")
    assert scope.query("SYST:ERR?") == '-420,"Query UNTERMINATED;injected"'
    scope.write("SIM:FAUL:ERR 0")
    assert scope.query("SYST:ERR?").startswith("-224,")


def test_several_clients_at_once_share_state_but_not_error_queues(bench, connect):
    clients = [connect(bench, "supply") for _ in range(4)]
    clients[0].write("VOLT 5;OUTP ON")
    assert clients[0].query("OUTP?") == "1"
    clients[1].write("NO:SUCH:THING")
    results: dict[int, list[str]] = {}

    def poll(k: int) -> None:
        results[k] = [clients[k].query("MEAS:VOLT?") for _ in range(25)]

    threads = [threading.Thread(target=poll, args=(k,)) for k in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(10)
    assert sorted(results) == [0, 1, 2, 3]
    for replies in results.values():
        assert all(float(r) == pytest.approx(5.0, abs=0.01) for r in replies)
    assert bench.servers["supply"].client_count == 4
    assert clients[0].query("SYST:ERR?") == '0,"No error"'
    assert clients[1].query("SYST:ERR?").startswith("-113,")


def test_delay_once_from_scpi_and_a_bad_fault_parameter(bench, connect):
    scope = connect(bench, "scope")
    scope.write("SIM:FAUL:DEL 0.4,ONCE")
    _timed_out(scope, "*OPC?")
    assert scope.read() == "1"  # the late reply, read before anything else is asked
    assert scope.query("SIM:FAUL?") == '""'  # ONCE: gone after one reply
    scope.write("SIM:FAUL:DROP TWICE")
    assert scope.query("SYST:ERR?").startswith("-224,")
