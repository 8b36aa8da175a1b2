"""Test waveforms that look like a scope's: noise, 8-bit quantisation, ringing, DC offset.

Deterministic (seeded) so a failure reproduces. Times in s, levels in V.
"""

from __future__ import annotations

import numpy as np


def quantise(y: np.ndarray, bits: int = 8, lo: float = -2.0, hi: float = 14.0) -> np.ndarray:
    """An ADC of ``bits`` over [lo, hi] (a scope's vertical range), clipping at the rails."""
    lsb = (hi - lo) / 2**bits
    codes = np.clip(np.round((y - lo) / lsb), 0, 2**bits - 1)
    return lo + codes * lsb


def scope(
    y: np.ndarray,
    *,
    noise_v: float = 0.05,
    offset_v: float = 0.0,
    bits: int = 8,
    lo: float = -2.0,
    hi: float = 14.0,
    seed: int = 0,
) -> np.ndarray:
    """What the scope shows: the signal plus an offset and Gaussian noise, quantised."""
    rng = np.random.default_rng(seed)
    return quantise(y + offset_v + rng.normal(0.0, noise_v, y.size), bits, lo, hi)


def rc_pwm(
    n: int,
    dt: float,
    period_s: float,
    duty: float,
    tau_s: float,
    high_v: float = 12.0,
    phase_s: float = 0.0,
) -> np.ndarray:
    """A PWM through a first-order RC (each edge an exact exponential settling)."""
    t = np.arange(n) * dt + phase_s
    ph = np.mod(t, period_s)
    on = duty * period_s
    rise = high_v * (1.0 - np.exp(-ph / tau_s))
    # The falling edge starts from wherever the rising edge got to (fully settled here).
    fall = high_v * np.exp(-np.maximum(ph - on, 0.0) / tau_s)
    return np.where(ph < on, rise, fall)


def ringing_pwm(
    n: int,
    dt: float,
    period_s: float,
    duty: float,
    zeta: float,
    wn: float,
    high_v: float = 12.0,
    phase_s: float = 0.0,
) -> np.ndarray:
    """A PWM whose edges are the step response of G = wn^2/(s^2 + 2 zeta wn s + wn^2),
    computed by ``scipy.signal.step`` (the reference library), rising and falling alike."""
    from scipy import signal

    on_samples = int(round(duty * period_s / dt))
    period_samples = int(round(period_s / dt))
    t = np.arange(period_samples) * dt
    _, step = signal.step(signal.TransferFunction([wn**2], [1.0, 2 * zeta * wn, wn**2]), T=t)
    one = np.empty(period_samples)
    # Rising at 0, falling at on_samples: superpose the step and a negative step.
    one[:] = step
    one[on_samples:] -= step[: period_samples - on_samples]
    # The first period starts from rest; later periods carry the previous falling edge's tail,
    # negligible here because the edges settle well within a period.
    reps = int(np.ceil((n + int(round(phase_s / dt))) / period_samples))
    y = np.tile(one, reps)[int(round(phase_s / dt)) : int(round(phase_s / dt)) + n]
    return high_v * y


def trapezoid(
    n: int, dt: float, t_rise_start: float, ramp_s: float, width_s: float, high_v: float = 1.0
) -> np.ndarray:
    """0 V, a linear ramp to ``high_v`` of ``ramp_s``, flat for ``width_s``, linear ramp down."""
    t = np.arange(n) * dt
    up = np.clip((t - t_rise_start) / ramp_s, 0.0, 1.0)
    down = np.clip((t - t_rise_start - ramp_s - width_s) / ramp_s, 0.0, 1.0)
    return high_v * (up - down)


def damped_ring(
    n: int, dt: float, at_s: float, amplitude_v: float, freq_hz: float, decay_s: float
) -> np.ndarray:
    """A ring that starts at ``at_s``: amplitude_v sin(2 pi f (t - at)) exp(-(t - at)/decay),
    0 before (the parasitic L-C ringing a step excites; it starts from zero, no jump)."""
    s = np.arange(n) * dt - at_s
    ring = amplitude_v * np.sin(2 * np.pi * freq_hz * s) * np.exp(-np.maximum(s, 0.0) / decay_s)
    return np.where(s >= 0, ring, 0.0)


def gate_with_plateau(
    n: int,
    dt: float,
    t_on: float,
    t_off: float,
    v_drv: float = 12.0,
    v_pl: float = 4.6,
    tau_s: float = 36e-9,
    plateau_s: float = 31e-9,
    ring_v: float = 0.0,
    ring_hz: float = 150e6,
    ring_decay_s: float = 6e-9,
) -> np.ndarray:
    """V_gs of a MOSFET driven through R into C_iss: RC to V_pl, flat for Q_gd/I_g, RC to V_drv
    (the gate-charge picture of TI SLUA618), then an RC discharge at turn-off.

    ``ring_v`` > 0 adds the ringing of a real gate loop: a damped ring of that amplitude at the
    start of the plateau (the drain current stops rising; the source inductance's di/dt step)
    and at its end (V_DS reaches the bottom; the drain's ring couples through C_gd), at
    ``ring_hz``, decaying with ``ring_decay_s``.
    """
    t = np.arange(n) * dt
    t1 = -tau_s * np.log(1 - v_pl / v_drv)  # time to reach the plateau
    s = t - t_on
    rising = np.where(
        s < 0,
        0.0,
        np.where(
            s < t1,
            v_drv * (1 - np.exp(-s / tau_s)),
            np.where(
                s < t1 + plateau_s,
                v_pl,
                v_drv - (v_drv - v_pl) * np.exp(-(s - t1 - plateau_s) / tau_s),
            ),
        ),
    )
    at_off = rising[min(int(t_off / dt), n - 1)]
    y = np.where(t < t_off, rising, at_off * np.exp(-(t - t_off) / (tau_s / 2)))
    if ring_v > 0:
        for at in (t_on + t1, t_on + t1 + plateau_s):
            y = y + damped_ring(n, dt, at, ring_v, ring_hz, ring_decay_s)
    return y
