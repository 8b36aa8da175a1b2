"""Coverage of the computed uncertainties: for every metric the checklists judge or report,
over repeated noisy trials (seeds), the stated expanded uncertainty (k = 2) covers the known
truth in at least 95 % of the trials (GUM, JCGM 100:2008 §6.2: k = 2 for about 95 %).

Each trial goes through the runner's own analyses (``bringup.runner.analyses.analyse``) on the
demo board, as a step would: scope records with Gaussian noise, 8-bit quantisation over the
channel's screen, ringing, and the channel's and probe's gain and offset errors drawn per trial
uniformly within the specification the trace declares (so the type B terms are exercised,
not assumed). The truth of each metric comes from the generator (the waveform before noise,
errors and quantisation) or a published formula, named beside it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from analysis_synth import damped_ring, gate_with_plateau, ringing_pwm

from bringup.analysis.budgets import typed_resolution
from bringup.boards.board_file import load_board
from bringup.runner.analyses import AnalysisInput, RampStep, Trace, analyse

SEEDS = range(30)
COVERAGE: dict[str, tuple[int, int, list[float]]] = {}  # metric -> hits, trials, |error|/U
MIN_COVERAGE = 0.95

#: Second-order step at zeta = 0.5: omega_n t_r(10-90) = 1.6376 and overshoot 16.303 %
#: (REFERENCES §2 [computed with scipy]; overshoot = 100 exp(-pi zeta/sqrt(1-zeta^2)), Nise ch. 4).
ZETA, WN_TR, OS_PCT = 0.5, 1.6376, 16.303

# The bench file's specifications the trials draw their errors within.
DC_ACCURACY = 0.02  # of full scale, a typical 8-bit scope's DC gain accuracy
RATIO_TOL = 0.01  # a 10x probe's ratio tolerance


@pytest.fixture(scope="module")
def board():
    return load_board("demo")


class _Channel:
    """A scope channel: screen (offset, range) in V, 8 bits, its gain and offset errors
    drawn uniformly within +/- RATIO_TOL and +/- DC_ACCURACY of full scale."""

    def __init__(self, rng: np.random.Generator, offset_v: float, range_v: float) -> None:
        self.offset_v, self.range_v = offset_v, range_v
        self.gain = 1.0 + rng.uniform(-RATIO_TOL, RATIO_TOL)
        self.dc_v = DC_ACCURACY * range_v
        self.bias = rng.uniform(-self.dc_v, self.dc_v)
        self.rng = rng

    def trace(self, net: str, y: np.ndarray, dt: float, noise_v: float) -> Trace:
        lo = self.offset_v - self.range_v / 2
        q = self.range_v / 256
        seen = self.gain * y + self.bias + self.rng.normal(0.0, noise_v, y.size)
        volts = lo + np.clip(np.round((seen - lo) / q), 0, 255) * q
        return Trace(net, volts, dt, 0.0, (self.offset_v, self.range_v), code_step_v=q,
                     dc_accuracy_v=self.dc_v, ratio_tolerance=RATIO_TOL)  # fmt: skip


class _Tally:
    """Trials and hits per metric; the report lists every metric's coverage."""

    def __init__(self) -> None:
        self.hits: dict[str, int] = {}
        self.trials: dict[str, int] = {}
        self.ratios: dict[str, list[float]] = {}  # |error| / U, for the report

    def check(self, out, metric: str, truth: float) -> None:
        value = out.metrics.get(metric)
        assert value is not None, f"{metric} not measured: {out.reasons.get(metric)}"
        assert metric in out.uncertainties, f"{metric} has no computed uncertainty"
        u = out.uncertainties[metric]
        self.trials[metric] = self.trials.get(metric, 0) + 1
        self.hits[metric] = self.hits.get(metric, 0) + int(abs(value - truth) <= u)
        self.ratios.setdefault(metric, []).append(abs(value - truth) / u if u > 0 else math.inf)
        COVERAGE[metric] = (self.hits[metric], self.trials[metric], self.ratios[metric])

    def assert_covered(self) -> None:
        table = {m: self.hits[m] / self.trials[m] for m in self.trials}
        low = {m: f"{c:.0%}" for m, c in table.items() if c < MIN_COVERAGE}
        assert not low, f"coverage under 95 %: {low}; all: {table}"


# ------------------------------------------------------------------------------- rails
def _bus_ripple(t: np.ndarray, period: float, p2p: float, esr_step: float, duty: float):
    """A bulk capacitor's ripple: a zero-mean triangle of p2p falling while the switch is on
    and rising while it is off (charge balance, common practice), with the ESR's step I*ESR
    at each edge (the sim's rails.bus_ripple_knots, without the sim)."""
    ph = np.mod(t, period) / period
    on = ph < duty
    tri = np.where(on, p2p / 2 - p2p * ph / duty, -p2p / 2 + p2p * (ph - duty) / (1 - duty))
    return tri + np.where(on, -esr_step * (1 - duty), esr_step * duty)


def test_rail_levels_and_ripple_cover_the_truth(board):
    tally = _Tally()
    dt, n, period = 20e-9, 8192, 40e-6  # 25 kHz, about 4 periods
    t = np.arange(n) * dt
    for seed in SEEDS:
        rng = np.random.default_rng(1000 + seed)
        p2p = rng.uniform(0.05, 0.25)
        bus = 24.0 + _bus_ripple(t, period, p2p, 0.3 * p2p, 0.5)
        # the switch's turn-on rings the rail at 500 kHz, dying within a few microseconds
        for k in range(4):
            bus = bus + damped_ring(n, dt, k * period + 0.5e-6, 0.2 * p2p, 500e3, 1.5e-6)
        vdrv = 12.0 + 0.5 * rng.uniform(0.02, 0.2) * np.sin(4 * np.pi * t / period + seed)
        logic = 3.3 + 0.5 * rng.uniform(0.005, 0.05) * np.sin(2 * np.pi * t / period)
        traces = {}
        for net, y, off, rng_v, noise in (("bus", bus, 24.0, 2.0, 0.004),
                                          ("vdrv", vdrv, 12.0, 1.0, 0.002),
                                          ("logic", logic, 3.3, 0.4, 0.001)):  # fmt: skip
            traces[net] = _Channel(rng, off, rng_v).trace(net, y, dt, noise)
            truths = {f"{net}_level": float(np.mean(y)), f"{net}_ripple": float(np.ptp(y))}
            out = analyse("rail-levels", AnalysisInput(traces={net: traces[net]}), board)
            for metric, truth in truths.items():
                tally.check(out, metric, truth)
    tally.assert_covered()


# ------------------------------------------------------------------------- read-backs
def _read_back(rng: np.random.Generator, truth: float, fraction: float, offset: float,
               digits: int) -> float:  # fmt: skip
    """A read-back within its specification +/-(fraction x reading + offset), drawn
    uniformly, shown to ``digits`` decimals."""
    half = fraction * abs(truth) + offset
    return round(truth + rng.uniform(-half, half), digits)


SUPPLY_SPEC = {"V": (0.0005, 0.010), "A": (0.001, 0.002)}  # +/-(0.05 % + 10 mV), (0.1 % + 2 mA)


def test_supply_and_meter_readings_cover_the_truth(board):
    tally = _Tally()
    for seed in SEEDS:
        rng = np.random.default_rng(2000 + seed)
        steps, truths_a = [], []
        for volts in (6.0, 12.0, 18.0, 24.0):
            amps = volts / rng.uniform(400.0, 2000.0)  # the board's quiescent draw, PWM off
            truths_a.append(amps)
            steps.append(RampStep(volts, _read_back(rng, volts, *SUPPLY_SPEC["V"], 3),
                                  _read_back(rng, amps, *SUPPLY_SPEC["A"], 4), False))  # fmt: skip
        data = AnalysisInput(ramp=steps, supply_accuracy=dict(SUPPLY_SPEC))
        out = analyse("first-power", data, board)
        # the highest read-back is judged: its truth is the current of the step it came from
        k = int(np.argmax([s.current_a for s in steps]))
        tally.check(out, "ramp_current", truths_a[k])
        tally.check(out, "ramp_voltage", 24.0)
        # a meter showing millivolts: the last digit is all its budget knows (the bench file
        # gives no meter accuracy), so the truth is drawn within that digit
        logic = 3.3 + rng.uniform(-0.05, 0.05)
        typed = f"{logic:.3f} V"
        data = AnalysisInput(reading=round(logic, 3), reading_metric="logic_level",
                             reading_resolution=typed_resolution(typed, round(logic, 3)))  # fmt: skip
        tally.check(analyse("meter-reading", data, board), "logic_level", logic)
    tally.assert_covered()


# ---------------------------------------------------------------------- gate overdrive
def test_gate_overdrive_levels_cover_the_truth(board):
    tally = _Tally()
    dt, n, period = 2e-9, 20_000, 8e-6
    for seed in SEEDS:
        rng = np.random.default_rng(3000 + seed)
        vgs_high = rng.uniform(10.5, 12.0)
        bus = 24.0 + rng.uniform(-0.2, 0.2)
        sw_high = bus - rng.uniform(0.0, 0.4)
        wn = WN_TR / 30e-9
        vgs = ringing_pwm(n, dt, period, 0.5, ZETA, wn, vgs_high, phase_s=1e-6)
        sw = ringing_pwm(n, dt, period, 0.5, ZETA, wn, sw_high, phase_s=1e-6)
        traces = {
            "vgs": _Channel(rng, 6.0, 16.0).trace("vgs", vgs, dt, 0.05),
            "switch": _Channel(rng, 12.0, 32.0).trace("switch", sw, dt, 0.1),
        }
        supply = _read_back(rng, bus, *SUPPLY_SPEC["V"], 3)
        data = AnalysisInput(traces=traces, supply_v=supply, supply_accuracy=dict(SUPPLY_SPEC))
        out = analyse("gate-overdrive", data, board)
        # truth: each generator's settled high level; the drop is bus - switch high
        tally.check(out, "vgs_on", vgs_high)
        tally.check(out, "switch_high", sw_high)
        tally.check(out, "bus_level", bus)
        tally.check(out, "switch_drop", bus - sw_high)
    tally.assert_covered()


# ------------------------------------------------------------------------------- edges
def test_edge_metrics_cover_the_truth(board):
    tally = _Tally()
    dt, n, period = 2e-9, 16_000, 8e-6
    f_sw, r_load = board.design["switching_frequency"], board.design["load_resistance"]
    for seed in SEEDS:
        rng = np.random.default_rng(4000 + seed)
        tr_s = rng.uniform(20e-9, 40e-9)  # 10-90 of the switch node: 10 to 20 samples
        wn = WN_TR / tr_s
        high = rng.uniform(22.0, 24.0)
        sw = ringing_pwm(n, dt, period, 0.5, ZETA, wn, high, phase_s=0.7e-6 + seed * 0.37 * dt)
        # Vgs through R into C_iss with its Miller shelf and a gate-loop ring (TI SLUA618)
        v_pl, tau = rng.uniform(4.2, 5.0), 36e-9
        vgs = np.zeros(n)
        for k in range(2):
            t_on, t_off = 0.5e-6 + k * period, 0.5e-6 + k * period + period / 2
            vgs += gate_with_plateau(n, dt, t_on, t_off, v_pl=v_pl, tau_s=tau, plateau_s=40e-9,
                                     ring_v=0.15) * (np.arange(n) * dt < t_on + period)  # fmt: skip
        traces = {
            "switch": _Channel(rng, 10.0, 36.0).trace("switch", sw, dt, 0.1),
            "vgs": _Channel(rng, 6.0, 16.0).trace("vgs", vgs, dt, 0.04),
        }
        out = analyse("edges", AnalysisInput(traces=traces), board)
        # switch node: a second-order step at zeta = 0.5 both ways (REFERENCES §2)
        tally.check(out, "switch_rise", tr_s)
        tally.check(out, "switch_fall", tr_s)
        tally.check(out, "switch_overshoot", OS_PCT)
        # the falling edge undershoots 0 V by the same 16.303 % of the swing
        tally.check(out, "switch_negative_excursion", -OS_PCT / 100 * high)
        # P_sw = 1/2 V I (t_r + t_f) f_sw, I = V/R_load (ST A5972D datasheet eq. 23)
        tally.check(out, "switching_loss", 0.5 * high * high / r_load * 2 * tr_s * f_sw)
        # Vgs 10-90 of the generator (0 to 12 V): 10 % on the first RC segment at
        # -tau ln 0.9, 90 % on the last, tau ln((12 - V_pl)/1.2 V) after the shelf ends, which
        # starts at -tau ln(1 - V_pl/12) and lasts 40 ns (RC charging, common practice; the
        # rings have died by then)
        rise = (-tau * math.log(1 - v_pl / 12.0) + 40e-9 + tau * math.log((12.0 - v_pl) / 1.2)
                + tau * math.log(0.9))  # fmt: skip
        # turn-off: an RC discharge with tau/2: 10-90 = (tau/2) ln 9 (REFERENCES §2)
        tally.check(out, "vgs_rise", rise)
        tally.check(out, "vgs_fall", tau / 2 * math.log(9))
        tally.check(out, "miller_plateau", v_pl)
    tally.assert_covered()


# ------------------------------------------------------------------------------- droop
def _sagging_pulses(t, t1, ramp, on, period, start_v, rate):
    """Two on-pulses: a linear ramp from 0 V to ``start_v`` at ``t1``, a top sagging at
    ``rate`` V/s (the bootstrap capacitor feeding a constant current: dV/dt = -I/C, TI SLUA887
    §2), a linear ramp back to 0 V ``on`` seconds after ``t1``; again one period later."""
    y = np.zeros_like(t)
    for k in range(2):
        a = t1 + k * period
        s = t - a
        top = start_v - rate * (s - ramp)
        up = np.clip(s / ramp, 0.0, 1.0) * start_v
        down = np.clip(1.0 - (s - on) / ramp, 0.0, 1.0)
        y = np.where((s >= 0) & (s < ramp), up, y)
        y = np.where((s >= ramp) & (s < on), top, y)
        y = np.where((s >= on) & (s < on + ramp), down * (start_v - rate * (on - ramp)), y)
    return y


@pytest.mark.parametrize(
    ("offset_v", "range_v", "noise_v"),
    # the whole swing on the screen; or zoomed on the top as the shipped checklist does (10.8 V
    # offset, 6 V range: the off level and the edges' bottoms lie below the screen)
    [(6.0, 16.0, 0.03), (10.8, 6.0, 0.01)],
    ids=["whole", "zoomed"],
)
def test_droop_metrics_cover_the_truth(board, offset_v, range_v, noise_v):
    tally = _Tally()
    dt, n, period, on, ramp, t1 = 10e-9, 8000, 40e-6, 38e-6, 40e-9, 1e-6
    t = np.arange(n) * dt
    floor, uvlo = board.targets["vgs_end"].limit.min, board.design["driver_uvlo_falling"]
    for seed in SEEDS:
        rng = np.random.default_rng(5000 + seed)
        start, rate = rng.uniform(11.2, 11.8), rng.uniform(3e3, 2e4)
        b_start, b_rate = rng.uniform(11.0, 11.6), rng.uniform(3e3, 2e4)
        vgs = _sagging_pulses(t, t1, ramp, on, period, start, rate)
        vgs = vgs + damped_ring(n, dt, t1 + ramp, 0.3, 20e6, 80e-9)
        vbs = _sagging_pulses(t, t1, ramp, on, period, b_start, b_rate)
        traces = {
            "vgs": _Channel(rng, offset_v, range_v).trace("vgs", vgs, dt, noise_v),
            "vbs": _Channel(rng, offset_v, range_v).trace("vbs", vbs, dt, noise_v),
        }
        out = analyse("droop", AnalysisInput(traces=traces), board)
        # truth: the 50 % instants of the generator's edges (IEEE 181 pulse duration), at
        # half of the top's middle level; the lines at those instants
        mid = 0.5 * (start - rate * (on - ramp) / 2)
        t_on = t1 + ramp * mid / start
        t_off = t1 + on + ramp * (1 - mid / (start - rate * (on - ramp)))
        line = start + rate * (t1 + ramp - t_on)  # the top's line carried back to t_on
        tally.check(out, "on_time", t_off - t_on)
        tally.check(out, "vgs_start", line)
        tally.check(out, "vgs_end", line - rate * (t_off - t_on))
        tally.check(out, "vgs_droop", rate * (t_off - t_on))
        # the longest on-time to the floor: (V_start - V_floor) C / I (REFERENCES §3, the
        # charge balance with Q_G already spent at the start)
        tally.check(out, "on_time_supported", (line - floor) / rate)
        b_end = b_start - b_rate * (t_off - t1 - ramp)
        tally.check(out, "vbs_end", b_end)
        tally.check(out, "uvlo_margin", b_end - uvlo)
    tally.assert_covered()


# -------------------------------------------------------------------------------- soak
def test_soak_metrics_cover_the_truth(board):
    tally = _Tally()
    for seed in SEEDS:
        rng = np.random.default_rng(6000 + seed)
        final, tau = rng.uniform(40.0, 65.0), rng.uniform(150.0, 300.0)
        t = np.arange(0.0, 5.0 * tau, 5.0)
        truth = final - (final - 25.0) * np.exp(-t / tau)  # first order (REFERENCES §5)
        # a class 2 type K thermocouple: off by up to +/-2.5 K (IEC 60584-1 [memory])
        offset = rng.uniform(-1.0, 1.0) * max(2.5, 0.0075 * final)
        read = truth + offset + rng.normal(0.0, 0.05, t.size)
        temps = list(np.round(read / 0.0625) * 0.0625)
        out = analyse("soak", AnalysisInput(soak_times_s=list(t), soak_temps_c=temps), board)
        tally.check(out, "heatsink_final", final)
        tally.check(out, "soak_time_constant", tau)
        tally.check(out, "heatsink_last", float(truth[-1]))
    tally.assert_covered()


#: The metrics the tests above cover, by the analysis that produces them.
COVERED = {
    "first-power": {"ramp_current", "ramp_voltage"},
    "rail-levels": {f"{n}_{k}" for n in ("bus", "vdrv", "logic") for k in ("level", "ripple")},
    "meter-reading": {"logic_level"},
    "gate-overdrive": {"vgs_on", "switch_high", "bus_level", "switch_drop"},
    "edges": {"switch_rise", "switch_fall", "switch_overshoot", "switch_negative_excursion",
              "switching_loss", "vgs_rise", "vgs_fall", "miller_plateau"},
    "droop": {"on_time", "vgs_start", "vgs_end", "vgs_droop", "on_time_supported", "vbs_end",
              "uvlo_margin"},
    "soak": {"heatsink_final", "soak_time_constant", "heatsink_last"},
}  # fmt: skip


def test_every_metric_the_shipped_checklist_judges_or_reports_is_covered():
    # "every metric": each step's targets and reported metrics, by its analysis
    from bringup.checklist.load import load_checklist

    for step in load_checklist().steps():
        missing = set(step.targets) | set(step.report)
        missing -= COVERED.get(step.analysis, set())
        assert not missing, f"{step.id} ({step.analysis}): no coverage test for {missing}"
