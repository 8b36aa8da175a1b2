"""Support for the model's tests: look at the model's waveforms as a scope would, then measure
them with the measurement core (``bringup.analysis``), never by reading the model's internals.

``capture(model, net, t0, dt, n, range_v, offset_v, rng)``: the true waveform through a
first-order 350 MHz front end, with 0.15 % of full scale rms noise, rounded to 8 bits and
clipped to the screen (an IEEE Std 1057 digitiser model: bandwidth, noise, quantisation).

``measure_scenario(design, name, rng)``: every metric the standard checklist judges, measured
the way its steps record them (record lengths, ranges, duties of
``checklists/high-side-bootstrap.toml``), so the scenario plan can be checked against the
board's targets.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest

from bringup.analysis import AnalysisError, measure_droop, measure_edges, measure_rail, state_levels

BANDWIDTH_HZ = 350e6
NOISE_FRACTION = 0.0015
BITS = 8


def capture(
    model,
    net: str,
    t0: float,
    dt: float,
    n: int,
    range_v: float,
    offset_v: float,
    rng: np.random.Generator,
) -> np.ndarray:
    """Digitised volts of ``net``: band-limited, noisy, 8-bit, clipped to offset +/- range/2."""
    y = model.waveform(net, t0, dt, n)
    # First-order pole, discretised exactly: impulse response (1 - a) a^k, truncated at 1e-7.
    a = math.exp(-2.0 * math.pi * BANDWIDTH_HZ * dt)
    taps = max(1, math.ceil(math.log(1e-7) / math.log(a))) if a > 1e-7 else 1
    h = (1.0 - a) * a ** np.arange(taps)
    h /= h.sum()
    padded = np.concatenate((np.full(taps - 1, y[0]), y))
    y = np.convolve(padded, h, mode="valid")
    y = y + rng.standard_normal(n) * (NOISE_FRACTION * range_v)
    lsb = range_v / 2**BITS
    codes = np.clip(np.round((y - offset_v) / lsb), -(2 ** (BITS - 1)), 2 ** (BITS - 1) - 1)
    return codes * lsb + offset_v


def _model(design, scenario: str, duty: float, pwm: bool = True):
    from sim_instruments.model import StageModel

    m = StageModel(design, scenario)
    m.set_bus(design["bus_voltage"])
    m.set_pwm(pwm, duty)
    return m


def measure_scenario(design, name: str, rng: np.random.Generator) -> dict[str, float]:
    """The checklist's metrics for scenario ``name`` (units as the board's targets)."""
    out: dict[str, float] = {}
    v_bus, v_drv = design["bus_voltage"], design["gate_drive_voltage"]
    # power-rails: ramp current with the PWM off (largest step), rails unloaded and at duty_max.
    off = _model(design, name, 0.5, pwm=False)
    out["ramp_current"] = max(off.bus_current(k * v_bus) for k in (0.25, 0.5, 0.75, 1.0))
    dt = 200e-6 / 100_000
    for label, m in (("unloaded", off), ("loaded", _model(design, name, design["duty_max"]))):
        for net, rng_v, offset in (("bus", 8.0, v_bus), ("vdrv", 4.0, v_drv), ("logic", 1.0, 3.3)):
            r = measure_rail(capture(m, net, 0.0, dt, 100_000, rng_v, offset, rng))
            out[f"{net}_level_{label}"] = r.mean_v
            out[f"{net}_ripple_{label}"] = r.ripple_pp_v
    # gate-overdrive and edge-speed at 50 % duty: 100 kpt over 100 us, 2 us before the edge.
    m = _model(design, name, 0.5)
    dt = 100e-6 / 100_000
    vgs = capture(m, "vgs", -2e-6, dt, 100_000, 30.0, 10.0, rng)
    sw = capture(m, "switch", -2e-6, dt, 100_000, 50.0, 15.0, rng)
    bus = capture(m, "bus", -2e-6, dt, 100_000, 8.0, v_bus, rng)
    out["vgs_on"] = state_levels(vgs).high_v
    out["switch_drop"] = float(bus.mean()) - state_levels(sw).high_v
    e = measure_edges(sw, dt, -2e-6)
    out["switch_rise"] = e.rise_time_max_s
    out["switch_fall"] = e.fall_time_max_s
    out["switch_overshoot"] = e.overshoot_max_pct
    out["switch_negative_excursion"] = e.min_v
    amps = e.high_level_v / design["load_resistance"]
    loss = 0.5 * e.high_level_v * amps * (e.rise_time_max_s + e.fall_time_max_s)
    out["switching_loss"] = loss * design["switching_frequency"]
    out["vgs_rise"] = measure_edges(vgs, dt, -2e-6).rise_time_max_s
    # droop-max-on-time at duty_max: 100 kpt over 80 us.
    m = _model(design, name, design["duty_max"])
    dt = 80e-6 / 100_000
    vgs = capture(m, "vgs", -2e-6, dt, 100_000, 16.0, 6.0, rng)
    vbs = capture(m, "vbs", -2e-6, dt, 100_000, 16.0, 6.0, rng)
    try:
        d = measure_droop(vgs, dt, 10.5, -2e-6)
        b = measure_droop(vbs, dt, design["driver_uvlo_falling"], -2e-6)
    except AnalysisError:  # no on-pulse at all (the driver held off)
        pass
    else:
        out["vgs_droop"] = d.droop_v
        out["vgs_start"] = d.start_v
        out["vgs_end"] = d.end_v
        if d.t_on_max_s is not None:
            out["on_time_supported"] = d.t_on_max_s
        elif d.droop_rate_v_per_s <= 0 and d.end_v > 10.5:
            out["on_time_supported"] = 1.0  # no measurable droop (as the checklist reports it)
        out["uvlo_margin"] = b.end_v - design["driver_uvlo_falling"]
    # thermal at duty_max: where the heatsink settles (the soak's fit predicts it).
    out["heatsink_final"] = m.heatsink_temperature(20 * design["thermal_time_constant"])
    return out


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20261201)


@pytest.fixture
def digitise() -> Callable[..., np.ndarray]:
    return capture


@pytest.fixture(scope="session")
def scenario_metrics(demo_design) -> Callable[[str], dict[str, float]]:
    """Measured metrics per scenario, computed once per session."""
    cache: dict[str, dict[str, float]] = {}

    def get(name: str) -> dict[str, float]:
        if name not in cache:
            cache[name] = measure_scenario(demo_design, name, np.random.default_rng(7))
        return cache[name]

    return get
