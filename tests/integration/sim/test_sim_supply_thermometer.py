"""The simulated supply and thermometer through PyVISA.

Sources: a lab supply's rectangular CV/CC output characteristic (CV while the load draws less
than the limit, otherwise the voltage folds back to hold the limit) - common practice, no
source; SCPI-99 supply nodes, ``VOLT?`` is the setpoint and ``MEAS:VOLT?`` the measurement
[read: shared references §7]; kelvin = degC + 273.15 [read: SI Brochure, 9th ed., 2.3.1];
a first-order lag reaches 1 - e^-1 = 63.2 % of a step after one time constant [memory].
"""

from __future__ import annotations

import math

import pytest

from sim_instruments.thermometer import SENSOR_TAU_S


def test_supply_starts_off_and_rst_turns_it_off(bench, connect):
    supply = connect(bench, "supply")
    assert supply.query("OUTP?") == "0" and bench.supply.output_on is False
    assert abs(float(supply.query("MEAS:VOLT?"))) < 0.01
    supply.write("VOLT 12;OUTP ON")
    assert supply.query("OUTP?") == "1" and bench.supply.output_on
    assert bench.board.bus_v == pytest.approx(12.0)  # the board sees the output
    supply.write("*RST")
    assert supply.query("OUTP?") == "0" and not bench.supply.output_on
    assert float(supply.query("VOLT?")) == 0.0


def test_constant_voltage_then_current_limit_folds_back(bench, connect):
    supply = connect(bench, "supply")
    scope = connect(bench, "scope")
    scope.write("SIM:PWM:DUTY 0.5;SIM:PWM ON")
    assert scope.query("SIM:PWM?") == "1"
    supply.write("VOLT 24;CURR 8;OUTP ON")
    v, i = (float(x) for x in supply.query("MEAS:VOLT?;MEAS:CURR?").split(";"))
    assert v == pytest.approx(24.0, abs=0.01)
    with bench.board.lock:
        load_24 = bench.model.bus_current(24.0)
    assert i == pytest.approx(load_24, abs=0.002)  # the supply answers the model's load
    assert supply.query("STAT:QUES:COND?") == "0"  # CV
    limit = round(0.5 * load_24, 3)
    supply.write(f"CURR {limit}")
    v_cc, i_cc = (float(x) for x in supply.query("MEAS:VOLT?;MEAS:CURR?").split(";"))
    assert i_cc == pytest.approx(limit, abs=0.002)
    assert 0.5 < v_cc < 23.0  # folded back below the setpoint
    with bench.board.lock:
        assert bench.model.bus_current(v_cc) == pytest.approx(limit, abs=0.005)
    assert int(supply.query("STAT:QUES:COND?")) == 2  # CC bit
    assert float(supply.query("VOLT?")) == 24.0  # the setpoint is unchanged
    scope.write("SIM:PWM OFF")  # the load goes away: back to CV at the setpoint
    assert scope.query("SIM:PWM?") == "0"
    assert float(supply.query("MEAS:VOLT?")) == pytest.approx(24.0, abs=0.01)


def test_over_voltage_protection_trips_and_latches(bench, connect):
    supply = connect(bench, "supply")
    supply.write("VOLT:PROT 20;VOLT 12;OUTP ON")
    assert supply.query("OUTP?") == "1"
    supply.write("VOLT 22")  # above the protection level
    assert supply.query("OUTP?") == "0" and supply.query("VOLT:PROT:TRIP?") == "1"
    assert int(supply.query("STAT:QUES:COND?")) & 1
    supply.write("OUTP ON")  # refused while tripped
    assert supply.query("SYST:ERR?").startswith("-221,")
    supply.write("VOLT 12;VOLT:PROT:CLE;OUTP ON")
    assert supply.query("OUTP?") == "1" and supply.query("VOLT:PROT:TRIP?") == "0"
    supply.write("VOLT 61")  # beyond the 60 V supply
    assert supply.query("SYST:ERR?").startswith("-222,")


def test_temperature_follows_the_heatsink_with_lag_and_units(bench, connect):
    meter = connect(bench, "thermometer")
    meter.write("CONF:TEMP TC,K;UNIT:TEMP C")
    bench.clock.set_scale(0.0)  # hold simulated time still while we compare
    first = float(meter.query("MEAS:TEMP?"))
    with bench.board.lock:
        true = bench.model.heatsink_temperature(bench.clock.now())
    assert first == pytest.approx(true, abs=0.3)
    meter.write("UNIT:TEMP K")
    kelvin = float(meter.query("FETC?"))
    assert kelvin == pytest.approx(first + 273.15, abs=1e-6)  # [read: SI Brochure]
    meter.write("CONF:TEMP TC,J")
    assert meter.query("SYST:ERR?").startswith("-224,")


def test_sensor_lag_is_first_order(bench):
    # Drive the sensor directly with a known heatsink step: 63.2 % after one time constant.
    therm = bench.thermometer
    bench.clock.set_scale(0.0)
    start = therm.sensor_temperature()
    therm.settle_sensor_at(start - 10.0)  # the junction 10 K below the heatsink, as after a step
    bench.clock.advance(SENSOR_TAU_S)
    after = therm.sensor_temperature()
    heatsink = bench.board.heatsink_temperature()
    # [memory] first order: T(tau) = T_hs + (T0 - T_hs) e^-1, i.e. 63.2 % of the way there
    assert after == pytest.approx(heatsink + (start - 10.0 - heatsink) * math.exp(-1), abs=0.01)
    assert after < heatsink - 3.0  # still lagging: a few seconds are not enough to settle


def test_dmm_reads_the_net_under_its_leads(bench, connect):
    supply = connect(bench, "supply")
    meter = connect(bench, "thermometer")
    supply.write("VOLT 24;OUTP ON")
    assert supply.query("OUTP?") == "1"
    meter.write("SIM:PROB1:NET BUS")
    assert float(meter.query("MEAS:VOLT:DC?")) == pytest.approx(24.0, abs=0.01)
    meter.write("SIM:PROB1:NET VDRV")
    assert meter.query("SIM:PROB:NET?") == "VDRV"
    vdrv = float(meter.query("MEAS:VOLT:DC?"))
    assert vdrv == pytest.approx(12.0, abs=0.8)  # the 12 V gate-drive rail, unloaded
    meter.write("SIM:PROB2:NET BUS")  # the DMM has one pair of leads
    assert meter.query("SYST:ERR?").startswith("-114,")
