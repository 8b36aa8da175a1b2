"""The edges analysis takes the scope and probe's own rise time out of measured edges."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import ndtr

from bringup.boards.board_file import load_board
from bringup.runner.analyses import AnalysisInput, Trace, analyse

DT = 0.1e-9
GAUSS_10_90 = 2.5631  # 10-90 % of a Gaussian step in sigmas: 2 x Phi^-1(0.9) [computed]


def _pulses(rise_s: float, seed: int) -> np.ndarray:
    """Two 12 V pulses whose edges are Gaussian steps of 10-90 ``rise_s`` (Gaussian parts
    cascade exactly by root sum of squares), with noise and 8-bit steps over -2..14 V."""
    t = np.arange(30_000) * DT
    s = rise_s / GAUSS_10_90
    y = sum(ndtr((t - a) / s) - ndtr((t - a - 0.6e-6) / s) for a in (0.3e-6, 1.8e-6))
    y = 12.0 * y + np.random.default_rng(seed).normal(0.0, 0.03, t.size)
    lsb = 16.0 / 256
    return -2.0 + np.clip(np.round((y + 2.0) / lsb), 0, 255) * lsb


def _edges(switch_rise_s: float, chain: tuple[float, ...]):
    data = AnalysisInput(
        traces={
            "switch": Trace("switch", _pulses(switch_rise_s, 1), DT, 0.0, None, chain),
            "vgs": Trace("vgs", _pulses(40e-9, 2), DT, 0.0),
        }
    )
    return analyse("edges", data, load_board("demo"))


def test_the_chain_is_taken_out_of_the_switch_node_edges():
    # A 50 MHz scope (0.35/50 MHz = 7 ns, REFERENCES §9) on a 10 ns edge reads
    # sqrt(10^2 + 7^2) = 12.2 ns [computed]; the analysis reports the edge's own 10 ns.
    measured = float(np.hypot(10e-9, 7e-9))
    out = _edges(measured, (50e6,))
    assert out.metrics["switch_rise"] == pytest.approx(10e-9, rel=0.02)
    assert out.metrics["switch_fall"] == pytest.approx(10e-9, rel=0.02)
    chain = out.details["chain"]["switch_rise"]
    assert chain["chain_s"] == pytest.approx(7e-9) and chain["resolved"]
    assert any("after removing the scope and probe's own" in w for w in out.warnings)
    # Without bandwidths in the bench file nothing is changed.
    plain = _edges(measured, ())
    assert plain.metrics["switch_rise"] == pytest.approx(measured, rel=0.02)
    assert "chain" not in plain.details


def test_an_edge_the_chain_cannot_resolve_is_not_judged():
    # 3 ns behind a 7 ns chain reads 7.6 ns, 1.09x the chain: below 1.4x, no value.
    out = _edges(float(np.hypot(3e-9, 7e-9)), (50e6,))
    assert out.metrics["switch_rise"] is None
    assert "not judged" in out.reasons["switch_rise"]
    assert out.metrics["switching_loss"] is None


def test_a_small_computed_uncertainty_leaves_the_declared_guard_band():
    from types import SimpleNamespace

    from bringup.checklist.load import load_checklist
    from bringup.runner.executing import _judge

    out = _edges(10e-9, ())
    budget = out.details["budgets"]["switch_rise"]
    assert budget["k"] == 2.0 and budget["expanded"] == out.uncertainties["switch_rise"]
    board = load_board("demo")
    declared = board.targets["switch_rise"].uncertainty
    assert out.uncertainties["switch_rise"] < declared
    _, metrics = _judge(
        SimpleNamespace(board=board, step=load_checklist().step("edge-speed.edges")), out
    )
    rise = next(m for m in metrics if m.id == "switch_rise")
    assert rise.uncertainty == declared
