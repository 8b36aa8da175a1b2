"""The safe-state owner: protection before ON, hazard notices, and OFF on every way out.

The simulated bench runs in this process; the child-process cases run a real bench session in
a separate Python process that connects to it over loopback, so SIGINT and SIGTERM hit a
process whose supply output is really ON.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap

import pytest

from bringup.errors import InputError
from bringup.instruments import faults
from bringup.instruments.bench import load_bench, open_bench
from bringup.instruments.safety import (
    HazardLevel,
    HazardNotAcknowledged,
    energised,
    hazard_for,
)


@pytest.fixture
def rig(sim_bench, tmp_path):
    # the built-in sim profiles (timeouts of 2 s and more): no case here expects a timeout
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    with open_bench(load_bench(path)) as bench:
        yield sim, bench


def test_hazard_levels_follow_the_dc_energy_classes():
    # IEC 62368-1 Table 4: ES1 <= 60 V DC, ES2 <= 120 V DC [memory, REFERENCES.md section 8]
    assert hazard_for(60.0) is None
    assert hazard_for(60.5).level is HazardLevel.CAUTION
    assert hazard_for(120.0).level is HazardLevel.CAUTION
    assert hazard_for(120.5).level is HazardLevel.DANGER
    assert "60 V DC" in hazard_for(72.0).text and "local codes" in hazard_for(72.0).text


def _units(lines: list[str]) -> list[tuple[str, str]]:
    """Program messages as (HEADER, parameter) units in the order received, ';' split."""
    units = []
    for line in lines:
        for unit in line.split(";"):
            header, _, param = unit.strip().partition(" ")
            units.append((header.upper(), param.strip()))
    return units


def test_protection_is_set_and_read_back_before_the_output_goes_on(rig):
    sim, bench = rig
    before = len(sim.supply.received_lines())  # what opening the bench sent is not this test's
    with energised(bench, volts=24.0, current_limit_a=3.0, ovp_v=26.5) as powered:
        assert sim.supply.output_on
        assert (sim.supply.current_limit, sim.supply.ovp_level, sim.supply.voltage_set) == (
            3.0,
            26.5,
            24.0,
        )
        assert powered.volts == 24.0 and powered.notice is None
    assert not sim.supply.output_on
    # What the supply received, in order (the sim's command log; sim-supply short forms).
    units = _units(sim.supply.received_lines()[before:])
    on = [i for i, u in enumerate(units) if u == ("OUTP", "ON")]
    assert len(on) == 1, units  # turned ON exactly once
    first_on = on[0]

    def last_index(wanted) -> int:
        hits = [i for i, u in enumerate(units[:first_on]) if wanted(u)]
        assert hits, f"not sent before OUTP ON: {units[:first_on]}"
        return hits[-1]

    set_limit = last_index(lambda u: u[0] == "CURR" and u[1] and float(u[1]) == 3.0)
    set_ovp = last_index(lambda u: u[0] == "VOLT:PROT" and u[1] and float(u[1]) == 26.5)
    read_limit = last_index(lambda u: u == ("CURR?", ""))
    read_ovp = last_index(lambda u: u == ("VOLT:PROT?", ""))
    # set, then read back, then (and only then) ON; nothing re-sets them in between
    assert set_limit < read_limit < first_on and set_ovp < read_ovp < first_on
    between = units[min(read_limit, read_ovp) : first_on]
    assert not [u for u in between if u[0] in ("CURR", "VOLT:PROT")], between
    # and the output is switched OFF after ON (the way out of the block)
    assert ("OUTP", "OFF") in units[first_on:]


def test_voltage_above_the_touch_safe_limit_needs_acknowledgement(rig):
    sim, bench = rig
    with pytest.raises(HazardNotAcknowledged, match="CAUTION: 61 V DC") as info:
        with energised(bench, volts=61.0, current_limit_a=1.0, ovp_v=63.0):
            pass
    assert info.value.notice.level is HazardLevel.CAUTION
    assert not sim.supply.output_on and sim.supply.voltage_set == 0.0  # nothing was sent
    with pytest.raises(HazardNotAcknowledged, match="DANGER"):
        with energised(
            bench, volts=130.0, current_limit_a=1.0, ovp_v=140.0, acknowledged=HazardLevel.CAUTION
        ):
            pass
    assert not sim.supply.output_on


def test_acknowledged_voltage_the_supply_cannot_make_is_refused_by_the_instrument(rig):
    sim, bench = rig
    # the simulated supply stops at 60 V: its error queue refuses the setpoint (-222)
    with pytest.raises(faults.InstrumentError, match="-222"):
        with energised(
            bench, volts=61.0, current_limit_a=1.0, ovp_v=61.5, acknowledged=HazardLevel.CAUTION
        ):
            pass
    assert not sim.supply.output_on


def test_setpoint_at_or_above_ovp_is_refused_before_anything_is_sent(rig):
    sim, bench = rig
    with pytest.raises(InputError, match="below the OVP level"):
        with energised(bench, volts=24.0, current_limit_a=1.0, ovp_v=24.0):
            pass
    with energised(bench, volts=12.0, current_limit_a=1.0, ovp_v=15.0) as powered:
        with pytest.raises(InputError, match="below the OVP level"):
            powered.set_voltage(16.0)
        powered.set_voltage(14.0)
        assert sim.supply.voltage_set == 14.0 and sim.supply.output_on
    assert not sim.supply.output_on


@pytest.mark.parametrize("error", [RuntimeError, KeyboardInterrupt])
def test_an_exception_inside_the_step_turns_the_output_off(rig, error):
    sim, bench = rig
    with pytest.raises(error):
        with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
            assert sim.supply.output_on
            raise error("mid-step")
    assert not sim.supply.output_on


@pytest.mark.parametrize("role", ["thermometer", "scope"])
def test_losing_another_instrument_turns_the_output_off_at_once(rig, role):
    sim, bench = rig
    step = {
        "thermometer": bench.thermometer.read_temperature_c,  # a query
        "scope": bench.scope.arm,  # a command, then its error query
    }[role]
    with pytest.raises(faults.ConnectionLost):
        with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0) as powered:
            assert sim.supply.output_on
            sim.servers[role].stop()  # the instrument's cable is pulled
            try:
                step()
            except faults.ConnectionLost:
                # off before the runner has even seen the fault
                assert not sim.supply.output_on
                assert isinstance(powered.switched_off_because, faults.ConnectionLost)
                raise
    assert not sim.supply.output_on


def test_a_tripped_ovp_is_reset_on_entry_and_reported(rig):
    sim, bench = rig
    with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
        bench.supply.set_ovp(20.0)  # below the output: the supply trips and latches OFF
        assert bench.supply.ovp_tripped() and not sim.supply.output_on
    guard = energised(bench, volts=12.0, current_limit_a=1.0, ovp_v=15.0)
    with guard:
        assert sim.supply.output_on and not sim.supply.ovp_tripped
    assert guard.cleared_trip and not sim.supply.output_on


CHILD = textwrap.dedent(
    """
    import sys, time
    from bringup.instruments.bench import load_bench, open_bench
    from bringup.instruments.safety import energised

    bench_path, how = sys.argv[1], sys.argv[2]
    try:
        with open_bench(load_bench(bench_path)) as bench:
            with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
                print("ON", flush=True)
                if how == "raise":
                    bench.simulation.set_pwm(True)
                    raise RuntimeError("a step failed")
                deadline = time.monotonic() + 30
                while time.monotonic() < deadline:
                    time.sleep(0.05)  # a long measurement step, waiting for the signal
    except KeyboardInterrupt:
        print("interrupted", flush=True)
        sys.exit(130)
    """
)


@pytest.mark.parametrize(
    ("how", "code"),
    [
        ("SIGINT", 130),
        ("SIGTERM", 128 + signal.SIGTERM),
        ("raise", 1),
        ("SIGKILL", -signal.SIGKILL),
    ],
)
def test_child_session_leaves_the_output_off(sim_bench, tmp_path, how, code):
    sim = sim_bench()
    bench_path = tmp_path / "bench.toml"
    bench_path.write_text(sim.bench_file_text())
    script = tmp_path / "child.py"
    script.write_text(CHILD)
    child = subprocess.Popen(
        [sys.executable, str(script), str(bench_path), how.lower() if how == "raise" else "wait"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        line = child.stdout.readline()  # blocks until the child reports ON (or dies)
        assert line.strip() == "ON", child.stderr.read()
        if how != "raise":
            assert sim.supply.output_on
            os.kill(child.pid, getattr(signal, how))
        child.wait(timeout=20)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    assert child.returncode == code
    if how == "SIGKILL":
        # the control case: no software survives SIGKILL, the output stays ON (the sim does
        # not switch off when a client goes away), so the other cases prove the handlers
        assert sim.supply.output_on
        return
    assert not sim.supply.output_on
    if how == "raise":
        assert "a step failed" in child.stderr.read()
