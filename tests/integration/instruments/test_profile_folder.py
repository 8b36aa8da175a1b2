"""A user's profile folder reaches every command through BRINGUP_PROFILES, not only --profiles."""

import pytest

from bringup.errors import ConfigError
from bringup.instruments.bench import load_bench, open_bench
from bringup.instruments.profiles import BUILTIN_DIR, find_profile


def _user_copy(folder, replace_from: str, replace_to: str) -> None:
    folder.mkdir()
    text = (BUILTIN_DIR / "sim-scope.toml").read_text()
    assert replace_from in text  # the edit below must really change the copy
    (folder / "sim-scope.toml").write_text(text.replace(replace_from, replace_to))


def test_environment_folder_shadows_the_builtin_profile(tmp_path, monkeypatch):
    folder = tmp_path / "lab-profiles"
    _user_copy(folder, 'datatype = "int16"', 'datatype = "int8"')
    monkeypatch.setenv("BRINGUP_PROFILES", str(folder))
    profile = find_profile("sim-scope")
    assert profile.path == folder / "sim-scope.toml"
    monkeypatch.delenv("BRINGUP_PROFILES")
    assert find_profile("sim-scope").path == BUILTIN_DIR / "sim-scope.toml"


def test_missing_environment_folder_is_named(tmp_path, monkeypatch):
    monkeypatch.setenv("BRINGUP_PROFILES", str(tmp_path / "nowhere"))
    with pytest.raises(
        ConfigError, match=r"nowhere: profile folder not found \(from BRINGUP_PROFILES\)"
    ):
        find_profile("sim-scope")


def test_bench_opened_without_options_uses_the_environment_folder(sim_bench, tmp_path, monkeypatch):
    # a misspelt trigger command in the user's copy reaches the (simulated) instrument: proof that
    # open_bench, which run/resume/the notebook call without a folder, read the user's profile
    from bringup.instruments import faults

    folder = tmp_path / "lab-profiles"
    _user_copy(folder, '"TRIG:LEV {volts}"', '"TRIG:LEVL {volts}"')
    monkeypatch.setenv("BRINGUP_PROFILES", str(folder))
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    with open_bench(load_bench(path)) as bench:
        with pytest.raises(faults.InstrumentError, match=r"-113"):
            bench.scope.configure_trigger(source=1, level_v=2.5)
