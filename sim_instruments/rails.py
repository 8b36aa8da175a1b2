"""The board's rails: the bus at the board input, the gate-drive rail and the logic rail.

* Bus: the bulk capacitor supplies the pulsed switch current while the supply delivers its
  average. With the load current I on for a share D of the period, the capacitor's voltage is a
  zero-mean triangle of peak-to-peak I D (1 - D) / (f C) (charge balance, common practice, no
  source), and its ESR adds a step of I * ESR, -ESR (I - I_avg) while on and +ESR I_avg while off.
* Gate-drive rail (``vdrv``): a regulator from the bus, V = min(V_nom - R_out I, V_bus - dropout);
  or, when fed through a dropping resistor R_feed (a shunt regulator), V = min(V_nom, V_bus -
  R_feed I) - R_out I, which sags as soon as the load needs more than the resistor passes.
* Logic rail: a low-dropout regulator from the gate-drive rail.
"""

from __future__ import annotations

import numpy as np

from sim_instruments.stage_params import StageParameters

__all__ = ["bus_ripple_knots", "gate_drive_rail", "logic_rail", "ripple"]


def bus_ripple_knots(
    p: StageParameters, current_a: float, on_from: float, on_to: float
) -> tuple[np.ndarray, np.ndarray]:
    """Knots (s, V) of the bus ripple over one period for ``current_a`` (A) drawn from the
    bus between ``on_from`` and ``on_to`` (s): for ``numpy.interp``; zero mean."""
    period = p.period
    eps = 1e-9 * period
    on_from = min(max(on_from, 2 * eps), period)
    on_to = min(max(on_to, on_from), period)
    width = on_to - on_from
    if current_a <= 0.0 or width <= 0.0 or width >= period:
        return np.array([0.0, period]), np.zeros(2)
    duty = width / period
    i_avg = current_a * duty
    p2p = (current_a - i_avg) * width / p.bus_capacitance
    esr_on = -p.bus_capacitor_esr * (current_a - i_avg)
    esr_off = p.bus_capacitor_esr * i_avg
    off_len = period - width
    at_zero = -p2p / 2 + p2p * (period - on_to) / off_len
    xs = [0.0, on_from - eps, on_from, max(on_to - eps, on_from), on_to, period]
    ys = [
        at_zero + esr_off,
        p2p / 2 + esr_off,
        p2p / 2 + esr_on,
        -p2p / 2 + esr_on,
        -p2p / 2 + esr_off,
        at_zero + esr_off,
    ]
    return np.asarray(xs), np.asarray(ys)


def gate_drive_rail(p: StageParameters, v_bus: float, load_a: float) -> float:
    """Gate-drive rail (V) at bus ``v_bus`` (V) with ``load_a`` (A) drawn from it."""
    if v_bus <= 0.0:
        return 0.0
    if p.vdrv_feed_resistance > 0.0:
        v = min(p.gate_drive_voltage, v_bus - p.vdrv_feed_resistance * load_a)
    else:
        v = min(p.gate_drive_voltage, v_bus - p.vdrv_dropout)
    return max(v - p.vdrv_output_resistance * load_a, 0.0)


def logic_rail(p: StageParameters, vdrv: float) -> float:
    """Logic rail (V) from the gate-drive rail ``vdrv`` (V) through its low-dropout regulator."""
    return max(min(p.logic_voltage, vdrv - p.logic_dropout), 0.0)


def ripple(
    ph: np.ndarray, period: float, p2p: float, phase_rad: float, harmonic: int = 1
) -> np.ndarray:
    """A sinusoidal ripple of ``p2p`` (V peak to peak) at ``harmonic`` x the switching frequency."""
    return (0.5 * p2p) * np.sin(ph * (2.0 * np.pi * harmonic / period) + phase_rad)
