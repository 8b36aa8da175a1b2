"""Reading a record through a shipped profile reads the right volts, and a wrong scale is a
fault naming the profile key, never a number.

The instruments here are scripted loopback servers that answer as each family's manual says
(a ten-field preamble with unsigned bytes from a reference code; the same preamble with
unsigned 16-bit codes least significant byte first); the real PyVISA path reads them.
"""

from __future__ import annotations

import numpy as np
import pytest

from bringup.instruments import faults
from bringup.instruments.profiles import BUILTIN_DIR, load_profile
from bringup.instruments.scope import Scope
from bringup.instruments.visa import InstrumentSession


def _block(payload: bytes) -> bytes:
    digits = str(len(payload))
    return b"#" + str(len(digits)).encode() + digits.encode() + payload + b"\n"


class TenfieldScope:
    """Answers the commands of the ten-field family for one stored record (a responder for
    ``scripted_server``): codes u, volts = (u - yorigin - yreference) * yincrement."""

    def __init__(self, volts: np.ndarray, y_inc: float, y_origin: float, y_ref: float = 127):
        self.codes = np.rint(volts / y_inc + y_origin + y_ref).astype(np.uint8)
        self.volts = (self.codes.astype(float) - y_origin - y_ref) * y_inc  # what it holds
        self.pre = (
            f"0,2,{volts.size},1,1.000000e-06,-2.000000e-06,0,{y_inc:e},{y_origin:g},{y_ref:g}"
        )
        self.start, self.stop = 1, volts.size

    def __call__(self, line: str, n: int):
        if line == "*IDN?":
            return b"NULLPOINT,SIMSCOPE-TENFIELD,SC00000,0.1.0-sim\n"
        if line == ":SYSTem:ERRor?":
            return b'0,"No error"\n'
        if line.startswith(":WAVeform:STARt "):
            self.start = int(line.split()[1])
        elif line.startswith(":WAVeform:STOP "):
            self.stop = int(line.split()[1])
        elif line == ":WAVeform:PREamble?":
            return self.pre.encode() + b"\n"
        elif line == ":WAVeform:DATA?":
            return _block(self.codes[self.start - 1 : self.stop].tobytes())
        elif line == ":MEASure:ITEM? VAVG,CHANnel1":
            return f"{self.volts.mean():.9e}\n".encode()
        elif line == ":MEASure:ITEM? VPP,CHANnel1":
            return f"{np.ptp(self.volts):.9e}\n".encode()
        elif line.endswith("?"):
            return b"0\n"
        return None


def _scope(resource: str, profile_path) -> tuple[Scope, InstrumentSession]:
    session = InstrumentSession("scope", resource, load_profile(profile_path))
    session.open()
    return Scope(session), session


def _profile(tmp_path, old: str = "", new: str = ""):
    text = (BUILTIN_DIR / "rigol-ds1000z.toml").read_text()
    for before, after in zip(old.split(" | "), new.split(" | "), strict=True):
        if before:
            assert before in text
            text = text.replace(before, after)
    path = tmp_path / "rigol-ds1000z.toml"
    path.write_text(text)
    return path


REPORTED = np.array([-2.0, 0.0, 1.0, 2.5, 4.0])  # the trace of the report, volts


def test_the_reported_trace_reads_right_through_the_shipped_profile(scripted_server):
    # codes = V / 0.05 + 20 + 127, so [107, 147, 167, 197, 227]: computed by hand from the
    # family's formula volts = (code - yorigin - yreference) * yincrement
    fake = TenfieldScope(REPORTED, 0.05, 20)
    assert fake.codes.tolist() == [107, 147, 167, 197, 227]
    server = scripted_server(fake)
    scope, session = _scope(server.resource, BUILTIN_DIR / "rigol-ds1000z.toml")
    try:
        wf = scope.fetch_waveform(1)
        np.testing.assert_allclose(wf.volts(), REPORTED, atol=1e-12)
        np.testing.assert_allclose(wf.times(), [-2e-6, -1e-6, 0.0, 1e-6, 2e-6], atol=1e-15)
    finally:
        session.close()


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        # the closest profile the reporter could write: signed bytes, no reference code
        (
            'datatype = "uint8" | format_uint8',
            'datatype = "int8" | format_int8',
            "block.datatype",
        ),
        # the reference code without the origin: every volt off by 20 codes (1 V)
        (
            'code_offset = ["yorigin", "yreference"]',
            'code_offset = "yreference"',
            "scale.code_offset",
        ),
        # a step from the wrong field
        ('y_step = "yincrement"', 'y_step = "xincrement"', "scale.y_step"),
    ],
)
def test_a_wrong_scale_is_a_fault_naming_the_key(scripted_server, tmp_path, old, new, key):
    server = scripted_server(TenfieldScope(REPORTED, 0.05, 20))
    path = _profile(tmp_path, old, new)
    scope, session = _scope(server.resource, path)
    try:
        with pytest.raises(faults.RecordMismatch) as info:
            scope.fetch_waveform(1)
        assert info.value.key.startswith(key)
        assert str(path) in str(info.value) and "\n" not in str(info.value)
    finally:
        session.close()


def test_a_preamble_the_profile_cannot_describe_names_file_key_and_reply(scripted_server, tmp_path):
    fake = TenfieldScope(REPORTED, 0.05, 20)
    fake.pre = fake.pre.rsplit(",", 1)[0]  # nine fields
    server = scripted_server(fake)
    path = _profile(tmp_path)
    scope, session = _scope(server.resource, path)
    try:
        with pytest.raises(faults.ReplyNotDescribed) as info:
            scope.fetch_waveform(1)
        text = str(info.value)
        assert str(path) in text and "preamble.fields" in text and fake.pre[:30] in text
    finally:
        session.close()


@pytest.mark.parametrize("pipeline", [False, True], ids=["page-by-page", "pipelined"])
def test_a_long_record_is_read_in_pages_into_one(scripted_server, tmp_path, pipeline):
    # 600 001 points with noise, quantisation and ringing: three pages of at most 250 000
    rng = np.random.default_rng(4)
    t = np.arange(600_001) * 1e-8
    volts = 6.0 * (t % 2e-4 < 1e-4) + 0.8 * np.exp(-(t % 1e-4) / 3e-6) * np.sin(2e7 * t)
    volts += rng.normal(0, 0.05, t.size)
    fake = TenfieldScope(volts, 0.05, -60)
    server = scripted_server(fake)
    path = _profile(
        tmp_path,
        "page_points = 250000" if pipeline else "",
        "page_points = 250000\npipeline = true" if pipeline else "",
    )
    scope, session = _scope(server.resource, path)
    try:
        wf = scope.fetch_waveform(1)
        np.testing.assert_allclose(wf.volts(), fake.volts, atol=1e-9)
        reads = [line for line in server.received if line == ":WAVeform:DATA?"]
        assert len(reads) == 3
        assert ":WAVeform:STARt 500001" in server.received
        assert ":WAVeform:STOP 600001" in server.received
    finally:
        session.close()


def test_keysight_family_reads_unsigned_words_lsb_first(scripted_server):
    # (code - yreference) * yincrement + yorigin, 16-bit codes least significant byte first
    rng = np.random.default_rng(5)
    n = 4000
    t = np.arange(n) * 2e-9
    volts = 12.0 / (1 + np.exp(-(t - 4e-6) / 2e-8)) + 0.5 * np.exp(
        -np.clip(t - 4e-6, 0, None) / 1e-7
    ) * np.sin(3e8 * t)
    volts += rng.normal(0, 0.02, n)
    y_inc, y_origin, y_ref = 2.0e-4, 6.0, 32768
    codes = np.rint((volts - y_origin) / y_inc + y_ref).astype("<u2")
    held = (codes.astype(float) - y_ref) * y_inc + y_origin
    pre = f"1,0,{n},1,2.0e-09,-1.0e-06,0,{y_inc:e},{y_origin:e},{y_ref}"

    def reply(line, k):
        answers = {
            "*IDN?": b"KEYSIGHT TECHNOLOGIES,DSO-X 3024T,MY00000000,07.50\n",
            ":SYSTem:ERRor?": b'+0,"No error"\n',
            ":WAVeform:PREamble?": pre.encode() + b"\n",
            ":WAVeform:DATA?": _block(codes.tobytes()),
            ":MEASure:VAVerage? DISPlay,CHANnel2": f"{held.mean():e}\n".encode(),
            ":MEASure:VPP? CHANnel2": f"{np.ptp(held):e}\n".encode(),
        }
        return answers.get(line)

    server = scripted_server(reply)
    scope, session = _scope(server.resource, BUILTIN_DIR / "keysight-infiniivision-x.toml")
    try:
        session.identify()
        wf = scope.fetch_waveform(2)
        np.testing.assert_allclose(wf.volts(), held, atol=1e-9)
        assert ":WAVeform:BYTeorder LSBFirst" in server.received
        assert ":WAVeform:SOURce CHANnel2" in server.received
    finally:
        session.close()


@pytest.mark.parametrize("wrapped", [False, True], ids=["plain", "in-a-block-header"])
def test_ascii_records_with_constant_scale_and_no_preamble(scripted_server, tmp_path, wrapped):
    # volts sent as numbers (a scope in ASCii format): y_step = 1 V, x_step a constant; no
    # preamble query at all; noise and ringing as a real record has
    rng = np.random.default_rng(6)
    t = np.arange(500) * 4e-9
    volts = 5.0 * (t > 1e-6) + 0.3 * np.exp(-np.clip(t - 1e-6, 0, None) / 5e-8) * np.sin(2e8 * t)
    volts = np.round(volts + rng.normal(0, 0.01, t.size), 4)
    body = ",".join(f"{v:+.4e}" for v in volts)
    if wrapped:
        body = f"#9{len(body):09d}{body}"

    def reply(line, n):
        answers = {
            "*IDN?": b"NULLPOINT,SIMSCOPE-4,SC1,0\n",
            "TRAC? CH1": body.encode() + b"\n",
            "MEAS:VOLT:DC? CH1": f"{volts.mean():.6e}\n".encode(),
        }
        return answers.get(line)

    text = (BUILTIN_DIR / "sim-scope.toml").read_text()
    for old, new in (
        ('datatype = "int16"\nbyte_order = "big"', 'datatype = "ascii"'),
        ('waveform_preamble = "TRAC:PRE? {source}"\n', ""),
        ('data_format = "FORM {format}"\n', ""),
        ('byte_order = "FORM:BORD {order}"\n', ""),
        ('measure_peak_to_peak = "MEAS:VOLT:PTP? {source}"\n', ""),
    ):
        assert old in text
        text = text.replace(old, new)
    start, end = text.index("[preamble]"), text.index("[words]")
    text = text[:start] + "[scale]\ny_step = 1.0\nx_step = 4e-9\n\n" + text[end:]
    text = text.replace(
        'kind = "scope"\n',
        'kind = "scope"\nabsent = ["waveform_preamble", "data_format", "byte_order", '
        '"measure_peak_to_peak"]\n',
    )
    path = tmp_path / "sim-scope.toml"
    path.write_text(text)
    server = scripted_server(reply)
    scope, session = _scope(server.resource, path)
    try:
        wf = scope.fetch_waveform(1)
        np.testing.assert_allclose(wf.volts(), volts, rtol=1e-4, atol=1e-6)
        np.testing.assert_allclose(wf.times(), t, atol=1e-15)
    finally:
        session.close()
