"""The ASCII waveform formatter against Python's own float formatting, and the thermometer
at the end of a soak against the first-order thermal model's final value.

Sources: NR3 numeric response data (mantissa, ``E``, signed exponent), IEEE 488.2 8.7.4
[memory]; Python's ``format(x, ".8E")`` as the reference rounding (correctly rounded, per
the Python language reference, "Format Specification Mini-Language") [memory]; steady
heatsink temperature T = T_ambient + P * R_th [read: shared references, thermal section].
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sim_instruments.scope import format_ascii

_FLOATS = st.floats(min_value=-1e30, max_value=1e30, allow_nan=False, allow_infinity=False)


@settings(max_examples=200, deadline=None)
@given(st.lists(_FLOATS, min_size=1, max_size=50))
def test_ascii_fields_match_python_formatting(values):
    text = format_ascii(np.array(values)).decode("ascii")
    fields = text.split(",")
    assert len(fields) == len(values)
    for field, value in zip(fields, values, strict=True):
        if abs(value) < 1e-30:
            assert float(field) == 0.0
            continue
        # nine significant digits, as Python rounds them (1 ulp of slack for float64 scaling)
        assert float(field) == pytest.approx(float(format(value, ".8E")), rel=2e-9)
        assert len(field) == 15 and field[0] in "+-" and field[11] == "E"


def test_ascii_handles_powers_of_ten_and_rounding_carries():
    values = np.array([1000.0, 999.9999999999, 1e-5, 9.999999999e-3, -0.1, 0.0, 5e-31])
    fields = format_ascii(values).decode().split(",")
    assert fields[0] == "+1.00000000E+03"
    assert fields[1] == "+1.00000000E+03"  # the carry moves the exponent
    assert fields[2] == "+1.00000000E-05"
    assert fields[3] == "+1.00000000E-02"
    assert fields[4] == "-1.00000000E-01"
    assert float(fields[5]) == 0.0 and float(fields[6]) == 0.0


def test_thermometer_settles_at_ambient_plus_losses_times_thermal_resistance(
    bench, connect, demo_design
):
    supply = connect(bench, "supply")
    meter = connect(bench, "thermometer")
    supply.write("VOLT 24;CURR 8;OUTP ON")
    meter.write("SIM:PWM:DUTY 0.95;SIM:PWM ON;SIM:TIME:SCAL 0")
    assert meter.query("SIM:PWM?") == "1" and supply.query("OUTP?") == "1"
    meter.query("MEAS:TEMP?")  # the sensor starts following
    tau = demo_design["thermal_time_constant"]
    bench.clock.advance(12 * tau)  # e^-12: settled to 6 ppm of the rise [computed]
    readings = [float(meter.query("MEAS:TEMP?")) for _ in range(20)]
    with bench.board.lock:
        heat_w = bench.model.losses()["heatsink"]
    final = demo_design["ambient_temperature"] + heat_w * demo_design["thermal_resistance"]
    assert heat_w > 0.2  # the switch dissipates something at 95 % duty and 6 A
    assert np.mean(readings) == pytest.approx(final, abs=0.1)
    assert 0.01 < np.std(readings) < 0.2  # the reading carries its noise (0.05 degC rms)
