"""Every fault the simulated bench can inject, on every instrument, while the supply is ON.

Each case: open the bench (the built-in sim profiles, timeouts of 2 s and more), turn the output
on through the safe-state owner, arm one fault on one instrument, run an operation of that
instrument; only the operations expected to time out get a short timeout
(``short_timeouts``, 400 ms). The
right ``InstrumentFault`` subclass must come out with a one-line message naming the
instrument and the command, and afterwards the simulated supply must report output OFF.
"""

from __future__ import annotations

import pytest

from bringup.instruments import faults
from bringup.instruments.bench import load_bench, open_bench
from bringup.instruments.safety import energised

ROLES = ("scope", "supply", "thermometer")


@pytest.fixture
def rig(sim_bench, tmp_path):
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    with open_bench(load_bench(path)) as bench:
        yield sim, bench


#: The operation ``measure`` runs on each instrument.
MEASURE_OPERATION = {
    "scope": "measure_mean",
    "supply": "measure_voltage",
    "thermometer": "read_temperature",
}


def measure(bench, role):
    """A safe-to-repeat measurement query of ``role``."""
    if role == "scope":
        return bench.scope.measure_mean(1)
    if role == "supply":
        return bench.supply.measure_voltage()
    return bench.thermometer.read_temperature_c()


def configure(bench, role):
    """A configuration step of ``role`` (a command, then the error queue)."""
    if role == "scope":
        bench.scope.configure_trigger(source=1, level_v=6.0)
    elif role == "supply":
        bench.supply.set_voltage(24.0)
    else:
        bench.thermometer.configure()


def arm(sim, role, kind, **options):
    getattr(sim, role).faults.inject(kind, **options)


def check_message(exc: faults.InstrumentFault, role: str) -> None:
    text = str(exc)
    assert "\n" not in text and text.startswith(f"{role} after '")
    assert exc.instrument == role and exc.command


def powered(bench):
    return energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0)


def prime(bench):
    """A record for the scope's measurements: PWM on, one acquisition."""
    bench.simulation.set_pwm(True)
    bench.scope.acquire()


@pytest.mark.parametrize("role", ROLES)
def test_garbage_reply(rig, role):
    sim, bench = rig
    with pytest.raises(faults.GarbageReply, match="garbled reply: not text") as info:
        with powered(bench):
            prime(bench)
            arm(sim, role, "garbage")
            measure(bench, role)
    check_message(info.value, role)
    assert not sim.supply.output_on


@pytest.mark.parametrize("role", ROLES)
def test_overrange(rig, role):
    sim, bench = rig
    with pytest.raises(faults.Overrange, match=r"over range .*9\.9") as info:
        with powered(bench):
            prime(bench)
            arm(sim, role, "overrange")
            measure(bench, role)
    check_message(info.value, role)
    assert not sim.supply.output_on


@pytest.mark.parametrize("role", ROLES)
def test_queued_error_after_a_configuration_step(rig, role):
    sim, bench = rig
    with pytest.raises(faults.InstrumentError, match="reported an error: -222") as info:
        with powered(bench):
            arm(sim, role, "error", code=-222)
            configure(bench, role)
    check_message(info.value, role)
    assert info.value.code == -222
    assert not sim.supply.output_on


@pytest.mark.parametrize("role", ROLES)
def test_dropped_connection_during_a_configuration_step(rig, role):
    sim, bench = rig
    # the reply dropped is the error query's: not repeatable, so it is reported
    with pytest.raises(
        faults.ConnectionLost, match="connection lost: the instrument closed"
    ) as info:
        with powered(bench):
            arm(sim, role, "drop")
            configure(bench, role)
    check_message(info.value, role)
    assert "SYST:ERR?" in info.value.command  # names the step and the query that failed
    assert not sim.supply.output_on


@pytest.mark.parametrize("role", ROLES)
def test_dropped_reply_to_a_safe_query_is_recovered(rig, role):
    sim, bench = rig
    with powered(bench):
        prime(bench)
        expected = measure(bench, role)
        arm(sim, role, "drop")
        again = measure(bench, role)
        assert bench.sessions[role].retries == 1 and bench.sessions[role].reconnects == 1
        if role == "scope":
            assert again == expected  # the same record measured twice
        assert sim.supply.output_on  # a recovered query does not end the powered step
    assert not sim.supply.output_on


@pytest.mark.parametrize("role", ROLES)
def test_late_replies_are_a_timeout_and_switch_the_supply_off(rig, role, short_timeouts):
    sim, bench = rig
    # Only calls that must time out wait 400 ms: the measurement, and for a late supply also
    # its switch-off (OFF, the error query, the state read back), late under a persistent delay.
    cut = [MEASURE_OPERATION[role]]
    if role == "supply":
        cut += ["output", "error_query", "output_state"]
    with pytest.raises(faults.InstrumentFault) as info:
        with powered(bench):
            prime(bench)
            arm(sim, role, "delay", seconds=1.5)
            short_timeouts(bench.sessions[role], *cut)
            try:
                measure(bench, role)
            except faults.InstrumentTimeout:
                # switched off by the fault listener already, before the block is left
                assert not sim.supply.output_on
                raise
    if role == "supply":
        # the supply itself is late: OFF is sent but cannot be read back in time
        assert isinstance(info.value, faults.ProtectionFault)
        assert "output OFF not confirmed" in str(info.value)
        assert isinstance(info.value.__context__, faults.InstrumentTimeout)
    else:
        assert isinstance(info.value, faults.InstrumentTimeout)
        assert f"no reply in time: nothing within {short_timeouts.ms} ms" in str(info.value)
        check_message(info.value, role)
    assert not sim.supply.output_on
    short_timeouts.restore()
    getattr(sim, role).faults.clear()  # so that closing the bench can confirm OFF again


def test_truncated_waveform_block(rig, short_timeouts):
    sim, bench = rig
    with pytest.raises(
        faults.TruncatedBlock, match=r"cut short: \d+ of \d+ announced bytes"
    ) as info:
        with powered(bench):
            prime(bench)
            arm(sim, "scope", "truncate")
            short_timeouts(bench.sessions["scope"], block_stall=True)  # the block must stall
            try:
                bench.scope.fetch_waveform(1)
            finally:
                short_timeouts.restore()
    check_message(info.value, "scope")
    assert not sim.supply.output_on
    # the session recovers: the next fetch is whole
    assert bench.scope.fetch_waveform(1).points == sim.scope.points


@pytest.mark.parametrize("role", ["supply", "thermometer"])
def test_truncation_only_touches_binary_blocks(rig, role):
    # the supply and the thermometer send no blocks: an armed truncation leaves text alone
    sim, bench = rig
    with powered(bench):
        arm(sim, role, "truncate")
        assert isinstance(measure(bench, role), float)
    assert not sim.supply.output_on


def test_wrong_instrument_on_a_resource_is_an_unexpected_identity(sim_bench, tmp_path):
    sim = sim_bench()
    text = sim.bench_file_text()
    scope_res, supply_res = sim.resources["scope"], sim.resources["supply"]
    text = (
        text.replace(scope_res, "SWAP").replace(supply_res, scope_res).replace("SWAP", supply_res)
    )
    path = tmp_path / "bench.toml"
    path.write_text(text)
    with pytest.raises(
        faults.UnexpectedIdentity, match=r"SIMSUPPLY-60.*does not match profile 'sim-scope'"
    ) as info:
        open_bench(load_bench(path))
    assert str(info.value).startswith("scope after '*IDN?'")
    assert not sim.supply.output_on
