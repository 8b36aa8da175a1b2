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
