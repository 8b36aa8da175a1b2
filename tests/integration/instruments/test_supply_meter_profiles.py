"""Multi-channel supplies and temperature meters driven by the shipped family profiles over the
simulator's dialects: channel addressing, worded replies, protection set and read back before
ON, and a profile that cannot describe a reply failing in one line (file, key, reply)."""

from __future__ import annotations

import re

import pytest

from bringup.errors import ConfigError
from bringup.instruments import faults
from bringup.instruments.bench import open_bench_file
from bringup.instruments.profiles import BUILTIN_DIR, load_profile
from bringup.instruments.safety import energised
from bringup.instruments.supply import Regulation
from sim_instruments.bench import start_bench


def _profile_text(name: str) -> str:
    return (BUILTIN_DIR / f"{name}.toml").read_text()


@pytest.fixture
def dialect_bench(tmp_path, demo_design):
    """start(supply=..., thermometer=..., edit=lambda name, text: text) -> (sim, bench file,
    profile folder): the shipped profiles the sim's bench file names, identity swapped."""
    started = []

    def start(supply="nullpoint", thermometer="nullpoint", edit=None, bench_edit=None):
        sim = start_bench(
            dict(demo_design), dialects={"supply": supply, "thermometer": thermometer}
        )
        started.append(sim)
        folder = tmp_path / f"b{len(started)}"
        profiles = folder / "profiles"
        profiles.mkdir(parents=True)
        text = sim.bench_file_text()
        for name in re.findall(r'^profile = "([^"]+)"$', text, flags=re.M):
            body = _profile_text(name)
            (profiles / f"{name}.toml").write_text(edit(name, body) if edit else body)
        bench = folder / "bench.toml"
        bench.write_text(bench_edit(text) if bench_edit else text)
        return sim, bench, profiles

    yield start
    for sim in started:
        sim.stop()


def test_the_reported_three_channel_supply_loads_without_borrowed_templates():
    # channel as an argument, protection YES/NO, regulation mode CV/CC/UR: each has its own key
    profile = load_profile(BUILTIN_DIR / "triple-output-argument.toml")
    assert profile.channels is not None and profile.channels.count == 3
    assert profile.command("output", channel="CH2", channel_number=2, state="ON") == (
        ":OUTPut:STATe CH2,ON"
    )
    assert profile.reply_meaning("ovp_tripped", "YES") is True
    assert profile.reply_meaning("ovp_tripped", "NO") is False
    assert profile.reply_meaning("regulation_mode", "UR") == "unregulated"
    assert profile.reply_meaning("regulation_mode", "CC") == "cc"
    # the combined set replaces the separate voltage and limit commands
    assert profile.has("apply") and not profile.has("set_voltage")


@pytest.mark.parametrize("supply", ["triple", "select"])
def test_protection_set_and_read_back_on_the_boards_channel_then_off(dialect_bench, supply):
    sim, bench_file, profiles = dialect_bench(supply=supply)
    if supply == "triple":  # someone switched the OVP off at the front panel
        with sim.supply.lock:
            sim.supply.fed.ovp_on = False
    with open_bench_file(bench_file, profiles_dir=profiles) as bench:
        with energised(bench, volts=24.0, current_limit_a=2.0, ovp_v=26.5) as powered:
            assert sim.supply.output_on  # the board's output, and only it
            others = [o for k, o in sim.supply.outputs.items() if k != sim.supply.board_output]
            assert not any(o.output_on for o in others)
            fed = sim.supply.fed
            assert (fed.voltage_set, fed.current_limit, fed.ovp_level) == (24.0, 2.0, 26.5)
            assert fed.ocp_on and fed.ocp_level == pytest.approx(2.2)  # 10 % above the limit
            # the triple's OVP has a switch: turned on (the select's is always on)
            assert fed.ovp_on or supply == "select"
            assert powered.regulation() is Regulation.CONSTANT_VOLTAGE
            assert powered.measure_voltage() == pytest.approx(24.0, abs=0.01)
        assert not sim.supply.output_on


def test_select_supply_sets_local_sense_where_the_bench_file_says_so(dialect_bench):
    sim, bench_file, profiles = dialect_bench(
        supply="select",
        bench_edit=lambda t: t.replace("channel = 3", "channel = 3\nremote_sense = true"),
    )
    with open_bench_file(bench_file, profiles_dir=profiles) as bench:
        with energised(bench, volts=12.0, current_limit_a=1.0, ovp_v=14.0):
            assert sim.supply.fed.sense_remote
    lines = sim.supply.received_lines()
    assert lines.index("VOLTage:SENSe:SOURce EXTernal") < lines.index("OUTPut ON")


def test_a_protection_that_trips_while_powered_is_a_fault_not_a_regulation_state(dialect_bench):
    # a first-power ramp reads "not in current limit" as "no short"; a supply whose OCP has
    # tripped reads 0 A and is not in CC either: the step must stop as not judged instead
    sim, bench_file, profiles = dialect_bench(supply="triple")
    with open_bench_file(bench_file, profiles_dir=profiles) as bench:
        with pytest.raises(faults.ProtectionFault, match="OCP tripped") as info:
            with energised(bench, volts=24.0, current_limit_a=2.0, ovp_v=26.5) as powered:
                with sim.supply.lock:  # the load's current crosses the OCP level: it trips
                    sim.supply.fed.ocp_level = 0.001
                    sim.supply.fed.solve()
                powered.regulation()
        assert info.value.command == ":OUTPut:MODE? CH2" or "OCP" in str(info.value)
        assert not sim.supply.output_on
        # the next energising clears the latched trip before anything else
        with energised(bench, volts=5.0, current_limit_a=1.0, ovp_v=6.0) as powered:
            assert powered.regulation() is Regulation.CONSTANT_VOLTAGE


def test_a_reply_word_the_profile_does_not_map_is_one_line_naming_file_key_and_reply(
    dialect_bench,
):
    def edit(name, text):
        return text.replace("YES = true\nNO = false", "TRUE = true\nFALSE = false")

    sim, bench_file, profiles = dialect_bench(supply="triple", edit=edit)
    with open_bench_file(bench_file, profiles_dir=profiles, make_safe_on_open=False) as bench:
        with pytest.raises(faults.ReplyNotDescribed) as info:
            with energised(bench, volts=24.0, current_limit_a=2.0, ovp_v=26.5):
                pass
    message = str(info.value)
    assert "\n" not in message
    assert str(profiles / "triple-output-argument.toml") in message
    assert "replies.ovp_tripped" in message and "'NO'" in message
    assert not sim.supply.output_on
    assert ":OUTPut:STATe CH2,ON" not in sim.supply.received_lines()


def test_a_reading_with_a_unit_the_profile_does_not_declare_is_refused(dialect_bench):
    def edit(name, text):
        return text.replace('units = ["C", "VDC"]', 'units = ["VDC"]')

    sim, bench_file, profiles = dialect_bench(thermometer="logger", edit=edit)
    with open_bench_file(bench_file, profiles_dir=profiles) as bench:
        bench.thermometer.configure()
        with pytest.raises(faults.ReplyNotDescribed) as info:
            bench.thermometer.read_temperature_c()
    message = str(info.value)
    assert "commands.read_temperature" in message and " C'" in message
    assert str(profiles / "logger-thermocouple.toml") in message


@pytest.mark.parametrize("thermometer", ["dmm", "logger"])
def test_thermocouple_reads_the_heatsink_through_the_family_profile(dialect_bench, thermometer):
    sim, bench_file, profiles = dialect_bench(thermometer=thermometer)
    sim.thermometer.settle_sensor_at(25.0)
    sim.clock.set_scale(0)
    with open_bench_file(bench_file, profiles_dir=profiles) as bench:
        bench.thermometer.configure()
        # ambient 25 degC on the demo board: the junction and the terminals agree [demo board]
        assert bench.thermometer.read_temperature_c() == pytest.approx(25.0, abs=0.3)


def test_without_the_internal_reference_junction_the_dmm_reads_wrong(dialect_bench):
    # why the profile sets the reference junction: with the meter's reset default (a fixed
    # 0 degC reference) a junction at 60 degC with terminals at 25 degC reads 35 degC
    # (a thermocouple measures the difference of its junctions; common practice)
    def edit(name, text):
        if name != "dmm-thermocouple":
            return text
        text = text.replace('reference_junction = "TEMPerature', '# reference_junction = "T')
        text = text.replace('reference_internal = "INTernal"', "")
        return text.replace("[profile]\n", '[profile]\nabsent = ["reference_junction"]\n', 1)

    sim, bench_file, profiles = dialect_bench(thermometer="dmm", edit=edit)
    sim.clock.set_scale(0)
    sim.thermometer.settle_sensor_at(60.0)
    with open_bench_file(bench_file, profiles_dir=profiles) as bench:
        bench.thermometer.configure()
        sim.thermometer.settle_sensor_at(60.0)
        assert bench.thermometer.read_temperature_c() == pytest.approx(35.0, abs=0.3)


def test_a_multi_channel_supply_without_a_channel_in_the_bench_file_is_refused(dialect_bench):
    sim, bench_file, profiles = dialect_bench(
        supply="triple", bench_edit=lambda t: t.replace('channel = "CH2"\n', "")
    )
    with pytest.raises(ConfigError, match=r"supply\.channel: missing: profile .* has 3 channels"):
        open_bench_file(bench_file, profiles_dir=profiles)
    sim2, bench2, profiles2 = dialect_bench(
        supply="triple", bench_edit=lambda t: t.replace('channel = "CH2"', 'channel = "CH4"')
    )
    with pytest.raises(ConfigError, match=r"'CH4' is not a channel .*\(CH1, CH2, CH3\)"):
        open_bench_file(bench2, profiles_dir=profiles2)


@pytest.mark.parametrize(
    ("change", "key", "problem"),
    [
        (("[words]", "[numbers]\nunits = [1]\n\n[words]"), "numbers.units", "list of unit"),
        (("[replies.ovp_tripped]", "[replies.measure_voltage]"), "replies.measure_voltage",
         "not a query answered in words"),
        (('CV = "cv"', 'CV = "steady"'), "replies.regulation_mode.CV", "must be one of"),
        (('ocp_tripped = ":OUTPut:OCP:QUES? {channel}"\n', ""), "commands.ocp_tripped",
         "missing"),
        (('"regulation_status"]', '"regulation_status", "regulation_mode"]'),
         "commands.regulation_mode", "is declared absent"),
        (('names = ["CH1", "CH2", "CH3"]', 'names = ["CH1", "CH2"]'), "channels.names",
         "names 2 channels, count is 3"),
        (('output = ":OUTPut:STATe {channel},{state}"', 'output = ":OUTP {chan},{state}"'),
         "commands.output", "unknown placeholder {chan}"),
    ],
)  # fmt: skip
def test_profile_mistakes_name_the_file_key_and_line(tmp_path, change, key, problem):
    text = _profile_text("triple-output-argument").replace(*change)
    path = tmp_path / "triple-output-argument.toml"
    path.write_text(text)
    with pytest.raises(ConfigError) as info:
        load_profile(path)
    message = str(info.value)
    assert key in message and problem in message, message
    assert str(path) in message


def test_single_channel_profiles_need_no_channel(tmp_path):
    # the simulator's own supply profile has no [channels]: channel 1 and no placeholder
    profile = load_profile(BUILTIN_DIR / "sim-supply.toml")
    assert profile.channels is None
    assert "select_channel" in profile.absent
    text = (BUILTIN_DIR / "sim-supply.toml").read_text() + "\n[channels]\ncount = 2\n"
    path = tmp_path / "sim-supply.toml"
    path.write_text(text)
    with pytest.raises(ConfigError, match="channels.count: 2 channels, but no template"):
        load_profile(path)


def test_declared_units_are_stripped_and_others_left_to_refuse(tmp_path):
    text = (BUILTIN_DIR / "logger-thermocouple.toml").read_text()
    profile = load_profile(BUILTIN_DIR / "logger-thermocouple.toml")
    assert profile.numbers.number_text("+2.512300000E+01 C") == "+2.512300000E+01"
    assert profile.numbers.number_text("+3.3E+00 VDC") == "+3.3E+00"
    # degrees Fahrenheit are not declared: the text stays, and reading it as a number fails
    assert profile.numbers.number_text("+7.7E+01 F") == "+7.7E+01 F"
    path = tmp_path / "logger-thermocouple.toml"
    path.write_text(text.replace('units = ["C", "VDC"]', 'units = ["C"]\nheader = true'))
    with pytest.raises(ConfigError, match=r"numbers\.header: unknown key .*echoes_headers"):
        load_profile(path)


def test_switching_off_beside_a_busy_session_turns_off_the_boards_channel(dialect_bench):
    # another thread holds the supply's lock (a slow exchange): the output goes off over a
    # second connection, and it must be the output feeding the board, not output 1
    import threading

    from bringup.instruments.safety import make_safe_now

    sim, bench_file, profiles = dialect_bench(supply="triple")
    with open_bench_file(bench_file, profiles_dir=profiles) as bench:
        with energised(bench, volts=24.0, current_limit_a=2.0, ovp_v=26.5):
            held, release = threading.Event(), threading.Event()

            def busy() -> None:
                with bench.supply.session.lock:
                    held.set()
                    release.wait(10)

            worker = threading.Thread(target=busy)
            worker.start()
            held.wait(10)
            try:
                assert make_safe_now(bench.supply, wait_s=0.05) is None
                assert not sim.supply.output_on
            finally:
                release.set()
                worker.join()


def test_plain_instruments_listing_reads_the_boards_channel(dialect_bench, capsys):
    from bringup.cli import main

    sim, bench_file, profiles = dialect_bench(supply="triple", thermometer="logger")
    assert main(["instruments", "--bench", str(bench_file), "--profiles", str(profiles)]) == 0
    out = capsys.readouterr().out
    assert "output    OFF" in out
    assert ":OUTPut:STATe? CH2" in sim.supply.received_lines()
