"""Optional operations: a profile may declare ``stop``, ``measure_mean`` and
``measure_peak_to_peak`` absent; the driver then refuses them by name without sending a line."""

from __future__ import annotations

import pytest

from bringup.errors import ConfigError
from bringup.instruments import faults
from bringup.instruments.bench import load_bench, open_bench
from bringup.instruments.profiles import BUILTIN_DIR, load_profile

OPTIONAL_LINES = (
    'stop = "ABOR"\n',
    'measure_mean = "MEAS:VOLT:DC? {source}"\n',
    'measure_peak_to_peak = "MEAS:VOLT:PTP? {source}"\n',
)


def _without_optional(folder, absent: str = '["stop", "measure_mean", "measure_peak_to_peak"]'):
    text = (BUILTIN_DIR / "sim-scope.toml").read_text()
    for line in OPTIONAL_LINES:
        assert line in text
        text = text.replace(line, "")
    text = text.replace('kind = "scope"\n', f'kind = "scope"\nabsent = {absent}\n')
    folder.mkdir(exist_ok=True)
    path = folder / "sim-scope.toml"
    path.write_text(text)
    return path


def test_profile_without_optional_operations_loads(tmp_path):
    profile = load_profile(_without_optional(tmp_path / "p"))
    assert not profile.has("measure_mean") and profile.has("arm")
    assert profile.absent == {"stop", "measure_mean", "measure_peak_to_peak"}


def test_an_undeclared_missing_optional_operation_is_named(tmp_path):
    path = _without_optional(tmp_path / "p", absent='["stop", "measure_mean"]')
    with pytest.raises(ConfigError, match=r"commands\.measure_peak_to_peak.*missing operation"):
        load_profile(path)


def test_a_required_operation_cannot_be_declared_absent(tmp_path):
    path = _without_optional(
        tmp_path / "p", absent='["stop", "measure_mean", "measure_peak_to_peak", "arm"]'
    )
    with pytest.raises(ConfigError, match=r"profile\.absent.*'arm' is not an optional operation"):
        load_profile(path)


def test_driver_refuses_an_absent_operation_without_sending_it(sim_bench, tmp_path):
    sim = sim_bench()
    folder = tmp_path / "profiles"
    _without_optional(folder)
    bench_path = tmp_path / "bench.toml"
    bench_path.write_text(sim.bench_file_text())
    with open_bench(load_bench(bench_path), profiles_dir=folder) as bench:
        sent_before = len(sim.scope.received_lines())
        for call in (
            bench.scope.stop,
            lambda: bench.scope.measure_mean(1),
            lambda: bench.scope.measure_peak_to_peak(1),
        ):
            with pytest.raises(faults.NotOffered, match=r"declared absent in profile 'sim-scope'"):
                call()
        assert len(sim.scope.received_lines()) == sent_before


def test_a_set_up_needing_what_the_profile_lacks_is_refused_before_anything_is_sent(
    sim_bench, tmp_path
):
    # a 2-channel scope profile without math, bandwidth limit or ground coupling
    sim = sim_bench()
    text = (BUILTIN_DIR / "sim-scope.toml").read_text()
    for line in (
        'math_expression = "CALC:MATH:EXPR \\"CH{plus}-CH{minus}\\""\n',
        'math_state = "CALC:MATH:STAT {state}"\n',
        'bandwidth_limit = "INP{channel}:FILT:LPAS {state}"\n',
        'coupling_gnd = "GND"\n',
        'math_source = "MATH"\n',
    ):
        assert line in text
        text = text.replace(line, "")
    text = text.replace(
        'kind = "scope"\n',
        'kind = "scope"\nabsent = ["math_expression", "math_state", "bandwidth_limit"]\n',
    )
    text = text.replace("[termination]", "[channels]\ncount = 2\n\n[termination]")
    folder = tmp_path / "profiles"
    folder.mkdir()
    (folder / "sim-scope.toml").write_text(text)
    bench_text = sim.bench_file_text()
    for n in (3, 4):  # the bench file wires only the two channels this scope has
        start = bench_text.index(f"[scope.channels.{n}]")
        end = bench_text.index("\n\n", start) + 2
        bench_text = bench_text[:start] + bench_text[end:]
    bench_path = tmp_path / "bench.toml"
    bench_path.write_text(bench_text)
    with open_bench(load_bench(bench_path), profiles_dir=folder) as bench:
        scope = bench.scope
        assert scope.channels == (1, 2)
        sent_before = len(sim.scope.received_lines())
        scope.check_offers(channels=[1, 2])  # a plain set-up is fine
        for needs, what in (
            ({"math": True}, "the math channel"),
            ({"bandwidth_limit": True}, "the bandwidth limit"),
            ({"couplings": {"gnd"}}, "ground coupling"),
            ({"channels": [1, 3]}, "channel 3"),
        ):
            kwargs = {"channels": [1, 2], **needs}
            with pytest.raises(faults.NotOffered, match=what):
                scope.check_offers(**kwargs)
        assert len(sim.scope.received_lines()) == sent_before
        # a run's set-up on this scope turns its missing bandwidth limit into full bandwidth
        scope.configure_channel(1, range_v=48.0, offset_v=18.0)
        scope.disable_math()
        assert not any("FILT" in line for line in sim.scope.received_lines())
