"""Every driver operation against the simulated bench over real PyVISA sockets.

Each test runs twice: with the sim profiles (short SCPI forms, 16-bit codes big-endian) and
with the deliberately different long-form profiles (optional nodes written out, 1/0
booleans, little-endian blocks): the same instrument state results, so the commands really
come from the profiles. The checks compare with the simulator's own state and record (its
Python objects), which the drivers can only have changed through SCPI.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from bringup.instruments.bench import load_bench, open_bench
from bringup.instruments.safety import energised
from bringup.instruments.supply import Regulation

PROFILE_SETS = {
    "short-forms": {"scope": "sim-scope", "supply": "sim-supply", "thermometer": "sim-thermometer"},
    "long-forms": {
        "scope": "sim-scope-longform",
        "supply": "sim-supply-longform",
        "thermometer": "sim-thermometer-longform",
    },
}


def bench_file(sim, folder: Path, names: dict[str, str]) -> Path:
    text = sim.bench_file_text()
    for role, default in (
        ("scope", "sim-scope"),
        ("supply", "sim-supply"),
        ("thermometer", "sim-thermometer"),
    ):
        text = text.replace(f'profile = "{default}"', f'profile = "{names[role]}"')
    path = folder / "bench.toml"
    path.write_text(text)
    return path


@pytest.fixture(params=sorted(PROFILE_SETS))
def opened(request, sim_bench, tmp_path):
    sim = sim_bench()
    path = bench_file(sim, tmp_path, PROFILE_SETS[request.param])
    with open_bench(load_bench(path)) as bench:
        yield sim, bench, request.param


def test_open_reports_identities_profiles_and_wiring(opened):
    sim, bench, which = opened
    assert bench.identities["scope"].startswith("NULLPOINT,SIMSCOPE-4,")
    assert bench.identities["supply"].startswith("NULLPOINT,SIMSUPPLY-60,")
    assert bench.identities["thermometer"].startswith("NULLPOINT,SIMTHERM-1,")
    assert bench.profiles["scope"].name == PROFILE_SETS[which]["scope"]
    # the bench file wires CH1 to the gate and CH3 to Vgs (the sim's default probes)
    assert bench.channel_for("gate") == 1 and bench.channel_for("vgs") == 3
    assert bench.simulation is not None


def test_scope_configuration_reaches_the_instrument(opened):
    sim, bench, _ = opened
    scope = bench.scope
    scope.configure_channel(
        2, range_v=60.0, offset_v=20.0, coupling="ac", bandwidth_limit=True, probe_ratio=100
    )
    ch = sim.scope.channels[2]
    assert (ch.enabled, ch.coupling, ch.bw_limit) == (True, "AC", True)
    assert (ch.range_v, ch.offset_v, ch.attenuation) == (60.0, 20.0, 100.0)
    scope.disable_channel(2)
    assert sim.scope.channels[2].enabled is False
    dt = scope.configure_timebase(duration_s=200e-6, points=20_000, start_s=-20e-6)
    # sample interval = duration / points [computed]
    assert dt == pytest.approx(200e-6 / 20_000, rel=1e-9)
    assert (sim.scope.points, sim.scope.sweep_offset_s) == (20_000, -20e-6)
    scope.configure_trigger(source=3, level_v=5.5, slope="falling")
    assert (sim.scope.trigger_source, sim.scope.trigger_level_v, sim.scope.trigger_slope) == (
        3,
        5.5,
        "NEG",
    )
    scope.configure_math_difference(1, 2)
    assert sim.scope.math_on and sim.scope.math_expr == (1, 2)
    scope.disable_math()
    assert not sim.scope.math_on


def test_waveform_codes_and_scale_match_the_instruments_record(opened):
    sim, bench, which = opened
    scope = bench.scope
    scope.configure_channel(1, range_v=48.0, offset_v=18.0)
    scope.configure_timebase(duration_s=100e-6, points=20_000, start_s=-10e-6)
    scope.configure_trigger(source=1, level_v=6.0)
    with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
        bench.simulation.set_pwm(True)
        scope.acquire()
        wf = scope.fetch_waveform(1)
        mean = scope.measure_mean(1)
        ptp = scope.measure_peak_to_peak(1)
    # both profiles can say either byte order: the driver asks for this host's own, so that
    # the record needs no byte swap on arrival (SCPI-99 FORMat:BORDer: NORMal = big-endian,
    # SWAPped = little-endian [memory])
    assert sim.scope.byte_order == ("SWAP" if sys.byteorder == "little" else "NORM")
    assert wf.codes.dtype == np.int16 and wf.points == 20_000
    truth = sim.scope.record.traces["CH1"]
    np.testing.assert_array_equal(wf.codes, truth.codes << (16 - truth.bits))
    np.testing.assert_allclose(wf.volts(), truth.as_volts(), rtol=0, atol=1e-5)
    assert wf.x_increment == pytest.approx(100e-6 / 20_000) and wf.x_origin == pytest.approx(-10e-6)
    assert wf.times()[0] == pytest.approx(-10e-6)
    # numpy as the reference for the scope's own measurements
    assert mean == pytest.approx(float(np.mean(truth.as_volts())), abs=1e-3)
    assert ptp == pytest.approx(float(np.ptp(truth.as_volts())), abs=1e-3)
    # a PWM gate swings from near 0 V to above the bus: the record shows a switching gate
    assert wf.volts().min() < 2.0 and wf.volts().max() > 24.0


def test_math_difference_waveform(opened):
    sim, bench, _ = opened
    scope = bench.scope
    scope.configure_timebase(duration_s=50e-6, points=10_000, start_s=-5e-6)
    scope.configure_math_difference(1, 2)
    with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
        bench.simulation.set_pwm(True)
        scope.acquire()
        wf = scope.fetch_waveform("math")
    np.testing.assert_allclose(
        wf.volts(), sim.scope.record.traces["MATH"].as_volts(), atol=2 * wf.y_increment
    )


def test_supply_setpoints_protection_and_measurements(opened):
    sim, bench, _ = opened
    supply = bench.supply
    supply.set_voltage(12.5)
    supply.set_current_limit(1.5)
    supply.set_ovp(15.0)
    assert (sim.supply.voltage_set, sim.supply.current_limit, sim.supply.ovp_level) == (
        12.5,
        1.5,
        15.0,
    )
    assert (supply.voltage_setpoint(), supply.current_limit(), supply.ovp_level()) == (
        12.5,
        1.5,
        15.0,
    )
    assert supply.ovp_tripped() is False
    assert supply.output_is_on() is False and supply.regulation() is Regulation.OFF
    with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0) as powered:
        assert sim.supply.output_on
        assert powered.measure_voltage() == pytest.approx(24.0, abs=0.1)
        # PWM off: the switch is open, so no load current; only the driver and logic rails
        # draw, tens of mA at most (common practice, no source)
        idle = powered.measure_current()
        assert 0.0 < idle < 0.1
        assert powered.regulation() is Regulation.CONSTANT_VOLTAGE
        bench.simulation.set_duty(0.5)
        bench.simulation.set_pwm(True)
        # the demo board's 4 ohm load switched at 50 % duty from 24 V draws D*V/R = 3.0 A on
        # average [computed]; its L/R = 0.25 us is far below the 40 us period, and the gate
        # charge adds only Qg*f = 40 nC * 25 kHz = 1 mA [computed: shared references §4]
        loaded = powered.measure_current()
        assert loaded - idle == pytest.approx(0.5 * 24.0 / 4.0, rel=0.02)
        assert powered.regulation() is Regulation.CONSTANT_VOLTAGE
        bench.simulation.set_duty(0.9)
        # a 4 ohm heater at 24 V and 90 % duty draws ~5.4 A on average [computed]: a 1 A limit
        # puts the supply in constant current, the output voltage sagging below the setpoint
        bench.supply.set_current_limit(1.0)
        assert powered.regulation() is Regulation.CONSTANT_CURRENT
        # in constant current the output holds the limit (a lab supply's rectangular CV/CC
        # characteristic, common practice, no source), within the 0.2 mA read-back noise
        assert powered.measure_current() == pytest.approx(1.0, abs=0.005)
        assert powered.measure_voltage() < 23.0
    assert not sim.supply.output_on


def test_thermometer_reads_the_heatsink(opened):
    sim, bench, _ = opened
    bench.thermometer.configure()
    assert sim.thermometer.unit == "C"
    reading = bench.thermometer.read_temperature_c()
    # a cold board sits at the design's ambient, 25 degC, within the sensor's noise
    assert reading == pytest.approx(sim.board.heatsink_temperature(), abs=1.0)
    bench.simulation.move_meter_leads("logic")
    assert bench.thermometer.measure_dc_volts() == pytest.approx(0.0, abs=0.5)  # unpowered board


def test_simulation_control_plays_the_operators_hands(opened):
    sim, bench, _ = opened
    control = bench.simulation
    control.move_probe(2, "bus")
    assert sim.scope.probes[2].net == "bus" and control.probe_net(2) == "bus"
    assert bench.channel_for("bus") == 2
    control.set_pwm(True)
    control.set_duty(0.25)
    assert control.pwm_enabled() and control.duty() == pytest.approx(0.25)
    control.set_time_scale(60.0)
    assert control.time_scale() == pytest.approx(60.0)
    assert control.scenario() == "healthy"


@pytest.mark.parametrize(("datatype", "word"), [("int8", "INT,8"), ("float32", "REAL,32")])
def test_users_profile_with_another_block_format(sim_bench, tmp_path, datatype, word):
    # a user's copy of the sim profile asking for 8-bit codes or 32-bit floats
    folder = tmp_path / "profiles"
    folder.mkdir()
    from bringup.instruments.profiles import BUILTIN_DIR

    text = (
        (BUILTIN_DIR / "sim-scope.toml")
        .read_text()
        .replace('datatype = "int16"', f'datatype = "{datatype}"')
    )
    (folder / "sim-scope.toml").write_text(text)
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    with open_bench(load_bench(path), profiles_dir=folder) as bench:
        bench.scope.configure_timebase(duration_s=50e-6, points=10_000, start_s=-5e-6)
        with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
            bench.simulation.set_pwm(True)
            bench.scope.acquire()
            wf = bench.scope.fetch_waveform(2)
    assert sim.scope.data_format == word.replace(",", "")
    assert wf.codes.dtype == {"int8": np.int8, "float32": np.float32}[datatype]
    truth = sim.scope.record.traces["CH2"].as_volts()
    # 8-bit codes keep the volts to within one 8-bit step; floats to float32 rounding
    tolerance = wf.y_increment if datatype == "int8" else 1e-5
    np.testing.assert_allclose(wf.volts(), truth, rtol=0, atol=tolerance)


def test_a_profiles_spelling_is_what_the_instrument_receives(sim_bench, tmp_path):
    # a profile that spells one command wrongly: the sim's error queue names the header
    from bringup.instruments import faults
    from bringup.instruments.profiles import BUILTIN_DIR

    folder = tmp_path / "profiles"
    folder.mkdir()
    text = (
        (BUILTIN_DIR / "sim-scope.toml")
        .read_text()
        .replace('"TRIG:LEV {volts}"', '"TRIG:LEVL {volts}"')
    )
    (folder / "sim-scope.toml").write_text(text)
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    with open_bench(load_bench(path), profiles_dir=folder) as bench:
        with pytest.raises(
            faults.InstrumentError, match=r"scope after 'TRIG:LEVL 2\.5': .*-113"
        ) as info:
            bench.scope.configure_trigger(source=1, level_v=2.5)
        assert info.value.code == -113  # Undefined header (SCPI-99 error list)
        assert sim.scope.trigger_source == 1  # the steps before it went through


def test_public_pyvisa_path_reads_the_same_record(sim_bench, tmp_path):
    # fast_reads=False: only the resource API (read_raw / read_bytes), as with another backend
    sim = sim_bench()
    path = bench_file(sim, tmp_path, PROFILE_SETS["short-forms"])
    with open_bench(load_bench(path), fast_reads=False) as bench:
        bench.scope.configure_timebase(duration_s=50e-6, points=10_000, start_s=-5e-6)
        bench.scope.acquire()
        wf = bench.scope.fetch_waveform(1)
        assert bench.sessions["scope"].query("*IDN?").startswith("NULLPOINT,SIMSCOPE-4")
    truth = sim.scope.record.traces["CH1"]
    np.testing.assert_array_equal(wf.codes, truth.codes << (16 - truth.bits))


def test_one_instrument_shared_by_two_threads_never_mixes_replies(sim_bench, tmp_path):
    import threading

    sim = sim_bench()
    path = bench_file(sim, tmp_path, PROFILE_SETS["short-forms"])
    with open_bench(load_bench(path)) as bench:
        bench.scope.configure_timebase(duration_s=50e-6, points=10_000, start_s=-5e-6)
        bench.scope.acquire()
        expected = bench.scope.fetch_waveform(2).codes
        problems: list[str] = []

        def fetch() -> None:
            for _ in range(15):
                if not np.array_equal(bench.scope.fetch_waveform(2).codes, expected):
                    problems.append("waveform differs")

        def ask() -> None:
            for _ in range(60):
                if not bench.sessions["scope"].query("*IDN?").startswith("NULLPOINT,SIMSCOPE-4,"):
                    problems.append("identity reply mixed up")

        threads = [threading.Thread(target=fetch), threading.Thread(target=ask)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(30)
        assert not problems and not any(t.is_alive() for t in threads)
