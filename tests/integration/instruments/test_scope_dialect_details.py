"""Details of the profile language met on the wire: errors through the event status register,
replies with echoed headers, acquisitions that never complete, CR+LF terminations."""

from __future__ import annotations

import pytest

from bringup.instruments import faults
from bringup.instruments.bench import load_bench, open_bench
from bringup.instruments.profiles import BUILTIN_DIR, load_profile
from bringup.instruments.scope import Scope
from bringup.instruments.visa import InstrumentSession, strip_header


@pytest.fixture
def outpre(demo_design, tmp_path):
    from sim_instruments.bench import start_bench

    running = start_bench(dict(demo_design), dialects={"scope": "outpre"})
    try:
        path = tmp_path / "bench.toml"
        path.write_text(running.bench_file_text())
        with open_bench(load_bench(path)) as bench:
            yield running, bench
    finally:
        running.stop()


def test_an_error_is_read_through_the_event_register_and_its_message(outpre):
    running, bench = outpre
    session = bench.sessions["scope"]
    assert session.profile.error_style == "event_register"
    with pytest.raises(faults.InstrumentError) as info:
        with session.lock:
            session.write("CH1:POSition 9")  # the family allows +-5 divisions
            session.check_errors("CH1:POSition 9")
    text = str(info.value)
    assert "CH1:POSition 9" in text and "-222" in text  # EVMsg? told the code and the text
    session.check_errors(None)  # read once: the register is clear again


def test_replies_with_echoed_headers_are_read_as_values(outpre):
    running, bench = outpre
    session = bench.sessions["scope"]
    assert running.scope.dialect.header  # the dialect echoes headers
    raw = session.query("CH1:SCAle?")
    assert raw.startswith(":CH1:SCALE ")
    assert float(strip_header(raw)) == pytest.approx(6.0)  # 48 V over 8 divisions
    scope = bench.scope
    scope.configure_channel(2, range_v=24.0, offset_v=6.0)
    assert running.scope.channels[2].range_v == pytest.approx(24.0)
    scope.configure_timebase(duration_s=20e-6, points=2000, start_s=-2e-6)
    scope.acquire()
    # ":MEASUREMENT:IMMED:VALUE <mean>" read as the mean; the board is unpowered: about 0 V
    assert abs(scope.measure_mean(2)) < 0.5
    wf = scope.fetch_waveform(2)  # ":WFMOUTPRE:..." fields and ":CURVE #..." read through
    assert wf.points == 2000


def test_an_acquisition_that_never_completes_is_a_timeout_naming_the_last_reply(
    scripted_server, tmp_path
):
    def reply(line, n):
        if line == "*IDN?":
            return b"NULLPOINT,SIMSCOPE-TENFIELD,SC1,0\n"
        if line == ":SYSTem:ERRor?":
            return b'0,"No error"\n'
        if line == ":TRIGger:STATus?":
            return b"WAIT\n"  # never triggered
        return None

    text = (BUILTIN_DIR / "rigol-ds1000z.toml").read_text()
    text = text.replace("timeout_ms = 30000", "timeout_ms = 300")
    path = tmp_path / "rigol-ds1000z.toml"
    path.write_text(text)
    server = scripted_server(reply)
    session = InstrumentSession("scope", server.resource, load_profile(path))
    session.open()
    try:
        with pytest.raises(faults.InstrumentTimeout) as info:
            Scope(session).acquire()
        message = str(info.value)
        assert "'WAIT'" in message and "STOP" in message and "[acquire] done" in message
        assert server.received.count(":TRIGger:STATus?") >= 2  # it polled, then gave up
    finally:
        session.close()


def test_cr_lf_terminations(scripted_server, tmp_path):
    seen = []

    def reply(line, n):
        seen.append(line)
        if line.rstrip("\r") == "*IDN?":
            return b"NULLPOINT,SIMSCOPE-4,SC1,0\r\n"
        if line.rstrip("\r") == "MEAS:VOLT:DC? CH1":
            return b"1.25E+00\r\n"
        return None

    text = (BUILTIN_DIR / "sim-scope.toml").read_text()
    text = text.replace('read = "\\n"\nwrite = "\\n"', 'read = "\\r\\n"\nwrite = "\\r\\n"')
    path = tmp_path / "sim-scope.toml"
    path.write_text(text)
    profile = load_profile(path)
    assert profile.read_termination == "\r\n"
    server = scripted_server(reply)
    session = InstrumentSession("scope", server.resource, profile)
    session.open()
    try:
        assert session.identify().startswith("NULLPOINT,SIMSCOPE-4")
        assert Scope(session).measure_mean(1) == 1.25
        assert all(line.endswith("\r") for line in seen)  # CR+LF went out, LF ended the line
    finally:
        session.close()
