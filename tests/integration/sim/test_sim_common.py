"""IEEE 488.2 common commands, SCPI syntax and the error queue, through real PyVISA sessions.

Sources (tags as in the shared references): SCPI-99 vol. 1 ch. 6 (header syntax: short/long
forms, optional nodes, numeric suffixes, ';' and the relative path) [memory]; SCPI-99 vol. 2
21.8 error queue: FIFO, '0,"No error"' when empty, -350 "Queue overflow", cleared by *CLS and
not by *RST [read: shared references §7]; error numbers and texts -100 Command error, -102 Syntax
error, -108 Parameter not allowed, -113 Undefined header, -222 Data out of range, -224 Illegal
parameter value [memory], -109 Missing parameter, -221 Settings conflict, -230 Data corrupt or
stale [memory]; IEEE 488.2 11.5.1 standard event status register: bit 2 query error, bit 4
execution error, bit 5 command error, cleared by reading [memory]; 488.2 10.14 *IDN? four fields,
at most 72 characters [read: shared references §7].
"""

from __future__ import annotations

import re

import pytest


def _errors(inst) -> list[tuple[int, str]]:
    """Drain the error queue."""
    out = []
    for _ in range(40):
        code, text = inst.query("SYST:ERR?").split(",", 1)
        if int(code) == 0:
            assert text == '"No error"'
            return out
        out.append((int(code), text.strip('"')))
    raise AssertionError("error queue never emptied")


@pytest.mark.parametrize(
    "name,model",
    [("scope", "SIMSCOPE-4"), ("supply", "SIMSUPPLY-60"), ("thermometer", "SIMTHERM-1")],
)
def test_identity_and_version(bench, connect, name, model):
    inst = connect(bench, name)
    idn = inst.query("*IDN?")
    fields = idn.split(",")
    assert len(fields) == 4 and len(idn) <= 72  # [read: shared references §7, 488.2 *IDN?]
    assert fields[0] == "NULLPOINT" and fields[1] == model
    assert inst.query("SYST:VERS?") == "1999.0"  # SCPI-99 version reply form YYYY.V [memory]
    assert inst.query("*TST?") == "0"
    assert inst.query("*OPC?") == "1"


def test_error_queue_is_fifo_with_standard_numbers_and_texts(bench, connect):
    inst = connect(bench, "scope")
    inst.write("*CLS")
    inst.write("FROB:NICATE 3")  # no such header
    inst.write("INP1:COUP")  # missing parameter
    inst.write("INP1:COUP AC,DC")  # one parameter too many
    inst.write("SWE:POIN 5")  # below 1000 points
    inst.write("TRIG:SLOP SIDEWAYS")  # not a slope
    inst.write("INP1:ATT 1x")  # not a number
    errors = _errors(inst)
    codes = [c for c, _ in errors]
    assert codes == [-113, -109, -108, -222, -224, -104]
    assert errors[0][1].startswith("Undefined header")
    assert errors[1][1].startswith("Missing parameter")
    assert errors[2][1].startswith("Parameter not allowed")
    assert errors[3][1].startswith("Data out of range")
    assert errors[4][1].startswith("Illegal parameter value")
    assert errors[5][1].startswith("Data type error")


def test_queue_overflow_reports_minus_350_last(bench, connect):
    inst = connect(bench, "supply")
    inst.write(";".join(["NOPE"] * 30))
    errors = _errors(inst)
    assert errors[-1] == (-350, "Queue overflow")  # SCPI-99 vol. 2 21.8 [read: shared refs §7]
    assert all(code == -113 for code, _ in errors[:-1])


def test_cls_clears_queue_and_status_but_rst_does_not(bench, connect):
    inst = connect(bench, "thermometer")
    inst.write("BOGUS")
    inst.write("*RST")
    assert inst.query("SYST:ERR:COUN?") == "1"
    assert int(inst.query("*STB?")) & 4  # error queue not empty: STB bit 2 [memory]
    inst.write("*CLS")
    assert inst.query("SYST:ERR?") == '0,"No error"'
    assert inst.query("*ESR?") == "0"


def test_esr_bits_follow_the_error_class_and_read_clears(bench, connect):
    inst = connect(bench, "scope")
    inst.write("*CLS")
    inst.write("NOT:A:HEADER")  # -113: command error, bit 5 (32)
    inst.write("INP1:COUP FOO")  # -224: execution error, bit 4 (16)
    inst.write("SIM:FAUL:ERR -310")  # device-specific error, bit 3 (8)
    inst.write("SIM:FAUL:ERR -410")  # query error, bit 2 (4)
    assert int(inst.query("*ESR?")) == 32 | 16 | 8 | 4
    assert inst.query("*ESR?") == "0"  # reading clears it
    inst.write("*OPC")
    assert int(inst.query("*ESR?")) & 1  # operation complete bit 0 [memory]


def test_long_short_forms_case_optional_nodes_and_suffixes(bench, connect):
    inst = connect(bench, "supply")
    inst.write("SOURCE:VOLTAGE:LEVEL:IMMEDIATE:AMPLITUDE 5.5")
    assert float(inst.query("volt?")) == pytest.approx(5.5)
    inst.write("sour:volt:lev 7.25")
    assert float(inst.query(":VOLTage:LEVel:IMMediate:AMPLitude?")) == pytest.approx(7.25)
    inst.write("VOLTA 3")  # neither the short nor the long form
    assert _errors(inst)[0][0] == -113
    scope = connect(bench, "scope")
    scope.write("INPUT3:COUPLING AC;:inp2:coup gnd")
    assert scope.query("INP3:COUP?;INP2:COUP?;INP:COUP?") == "AC;GND;DC"  # no suffix = 1
    scope.write("SENS4:VOLT:RANG:PTP 12.5")
    assert float(scope.query("SENSe4:VOLTage:RANGe:PTPeak?")) == pytest.approx(12.5)
    scope.write("INP5:COUP DC")  # no channel 5
    assert _errors(scope)[0][0] == -114


def test_semicolons_keep_the_path_and_answers_are_joined(bench, connect):
    scope = connect(bench, "scope")
    # After SWE:TIME the path is SWEep, so POIN is SWEep:POINts (SCPI-99 6.2.4 [memory]).
    scope.write("SENS:SWE:TIME 2E-4;POIN 20000;OFFS:TIME -1e-5")
    reply = scope.query("SWE:TIME?;POIN?;TINT?;*OPC?")
    time_s, points, interval, opc = reply.split(";")
    assert float(time_s) == pytest.approx(2e-4) and points == "20000" and opc == "1"
    assert float(interval) == pytest.approx(2e-4 / 20000)  # [computed] time / points
    assert float(scope.query("SWE:OFFS:TIME?")) == pytest.approx(-1e-5)


def test_rst_restores_defaults(bench, connect):
    scope = connect(bench, "scope")
    scope.write("SWE:POIN 123456;FORM REAL,32;INP2 OFF")
    scope.write("*RST")
    assert scope.query("SWE:POIN?") == "10000"
    assert scope.query("FORM?") == "ASC"
    assert scope.query("INP2?") == "1"
    assert re.fullmatch(r"[+-]?\d\.\d{9}E[+-]\d\d", scope.query("TRIG:LEV?"))  # NR3 [memory]


def test_command_only_and_query_only_headers(bench, connect):
    supply = connect(bench, "supply")
    supply.write("MEAS:VOLT 3")  # a query only
    supply.write("VOLT:PROT:CLE?")  # a command only: no reply is sent
    assert [c for c, _ in _errors(supply)] == [-113, -113]


def test_wai_ese_and_status_byte_summary(bench, connect):
    scope = connect(bench, "scope", timeout_ms=10000)
    scope.write("SWE:POIN 100000;INIT;*WAI")  # *WAI: the next command waits for the record
    assert scope.query("TRAC:PRE? CH1").startswith("100000,")
    scope.write("*ESE 32;BAD:HEADER")
    assert scope.query("*ESE?") == "32"
    assert int(scope.query("*STB?")) & 32  # ESB: an enabled event bit (command error) is set
    scope.write("*CLS")
    assert int(scope.query("*STB?")) == 0


def test_simulation_subsystem_is_shared_by_the_three_instruments(bench, connect):
    meter = connect(bench, "thermometer")
    supply = connect(bench, "supply")
    assert meter.query("SIM:SCEN?") == '"healthy"'
    meter.write("SIM:TIME:SCAL 0")  # hold simulated time
    assert float(meter.query("SIM:TIME:SCAL?")) == 0.0  # done before asking elsewhere
    assert float(supply.query("SIM:TIME:SCAL?")) == 0.0
    t0 = float(supply.query("SIM:TIME?"))
    assert float(meter.query("SIM:TIME?")) == t0
    supply.write("VOLT 24;CURR 8;OUTP ON")
    idle = float(supply.query("MEAS:CURR?"))
    meter.write("SIM:PWM:DUTY 0.5;SIM:PWM ON")  # the PWM switch, thrown from another instrument
    assert meter.query("SIM:PWM?") == "1" and supply.query("SIM:PWM?") == "1"
    loaded = float(supply.query("MEAS:CURR?"))
    # [computed] 24 V across the 4 ohm load at 50 % duty draws about 3 A on average
    assert loaded - idle == pytest.approx(24.0 / 4.0 * 0.5, rel=0.1)
    meter.write("SIM:PWM:DUTY 1.5")
    assert meter.query("SYST:ERR?").startswith("-222,")


def test_command_log_keeps_every_line_in_arrival_order_and_is_bounded(bench, connect):
    # The sim's own test hook (no real instrument has it): what clients sent, in order.
    from sim_instruments.scpi import RECEIVED_LOG_LINES

    a, b = connect(bench, "supply"), connect(bench, "supply")
    start = len(bench.supply.received_lines())
    a.write("VOLT 5; CURR 2")
    assert a.query("*OPC?") == "1"  # a's lines are handled before b sends
    assert b.query("VOLT?;CURR?") == "5.000000000E+00;2.000000000E+00"
    assert bench.supply.received_lines()[start:] == ["VOLT 5; CURR 2", "*OPC?", "VOLT?;CURR?"]
    a.write_raw(b"*CLS\n" * (RECEIVED_LOG_LINES + 50))  # more lines than the log holds
    assert a.query("*OPC?") == "1"
    log = bench.supply.received_lines()
    assert len(log) == RECEIVED_LOG_LINES and log[-1] == "*OPC?" and log[0] == "*CLS"
