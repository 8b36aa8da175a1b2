"""The standard checklist loads in the agreed order; every malformed case names file, key, line."""

from __future__ import annotations

import re

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import check_against_board, load_checklist, standard_checklist_path
from bringup.errors import ConfigError

TEXT = standard_checklist_path().read_text(encoding="utf-8")
# The droop step's zoomed vertical setup, shared by its vgs and vbs channels.
ZOOM = 'range = "0.5 * design.gate_drive_voltage", offset = "0.9 * design.gate_drive_voltage"'


def _line_of(text: str, needle: str, after: str | None = None) -> int:
    """1-based line of the first line containing ``needle`` (after the line containing
    ``after``, if given)."""
    start = 0
    lines = text.splitlines()
    if after is not None:
        start = next(i for i, line in enumerate(lines) if after in line)
    for i in range(start, len(lines)):
        if needle in lines[i]:
            return i + 1
    raise AssertionError(f"{needle!r} not found")


def _fails(tmp_path, text: str, key: str, line: int, problem: str) -> ConfigError:
    path = tmp_path / "checklist.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError) as info:
        load_checklist(path)
    err = info.value
    assert "\n" not in str(err)
    assert (err.key, err.line) == (key, line), str(err)
    assert str(err).startswith(f"{path}:{line}: {key}: ")
    assert re.search(problem, str(err)), str(err)
    return err


def test_standard_checklist_has_the_stages_in_order():
    checklist = load_checklist()
    assert [s.id for s in checklist.stages] == [
        "power-rails",
        "gate-overdrive",
        "edge-speed",
        "droop-max-on-time",
        "thermal",
    ]
    first = checklist.steps()[0]
    assert first.id == "power-rails.first-power"
    assert first.supply is not None and len(first.supply.ramp_v) >= 3
    # the ramp ends at the bus voltage and starts well below it
    board = load_board("demo")
    ramp = [s.resolve(board.design) for s in first.supply.ramp_v]
    assert ramp == sorted(ramp) and ramp[-1] == board.design["bus_voltage"] > 2 * ramp[0]
    check_against_board(checklist, board)


def test_every_step_of_the_standard_checklist_is_judged_and_cautioned():
    for step in load_checklist().steps():
        assert step.targets, step.id
        assert step.cautions, step.id
        if step.scope is not None:
            # acquisitions stay at modest record lengths (fast tests, fast benches)
            assert step.scope.points <= 200_000
            for cap in step.scope.captures:
                if cap.net in ("vgs", "vbs"):
                    assert cap.probe in ("differential", "math"), step.id


def test_vgs_steps_warn_about_probe_grounding():
    step = load_checklist().step("gate-overdrive.vgs-on")
    text = " ".join(step.cautions).lower()
    assert "differential" in text and "ground" in text


def test_unknown_analysis(tmp_path):
    text = TEXT.replace('analysis = "edges"', 'analysis = "edge-magic"')
    _fails(tmp_path, text, "stages.edge-speed.steps.edges.analysis",
           _line_of(text, 'analysis = "edge-magic"'), "unknown analysis 'edge-magic'")  # fmt: skip


def test_target_the_analysis_cannot_produce(tmp_path):
    text = TEXT.replace('targets = ["heatsink_final"]', 'targets = ["vgs_droop"]')
    _fails(tmp_path, text, "stages.thermal.steps.soak.targets",
           _line_of(text, 'targets = ["vgs_droop"]'), "yields no metric 'vgs_droop'")  # fmt: skip


def test_target_missing_from_the_board(tmp_path):
    board = load_board("demo")
    text = TEXT.replace('targets = ["ramp_current"]', 'targets = ["ramp_voltage"]')
    path = tmp_path / "checklist.toml"
    path.write_text(text, encoding="utf-8")
    checklist = load_checklist(path)
    with pytest.raises(ConfigError) as info:
        check_against_board(checklist, board)
    assert info.value.key == "stages.power-rails.steps.first-power.targets"
    assert info.value.line == _line_of(text, 'targets = ["ramp_voltage"]')
    assert "not defined in board file" in str(info.value)


def test_unknown_step_key(tmp_path):
    text = TEXT.replace('analysis = "soak"', 'analysis = "soak"\ncolour = "red"')
    _fails(tmp_path, text, "stages.thermal.steps.soak.colour", _line_of(text, "colour ="),
           "unknown key")  # fmt: skip


def test_missing_step_key(tmp_path):
    text = TEXT.replace('title = "Thermal soak at maximum duty"\n', "")
    _fails(tmp_path, text, "stages.thermal.steps.soak",
           _line_of(text, "[stages.thermal.steps.soak]"), "missing key 'title'")  # fmt: skip


def test_bad_unit_in_a_setting(tmp_path):
    text = TEXT.replace('duration = "1200 s"', 'duration = "1200 V"')
    _fails(tmp_path, text, "stages.thermal.steps.soak.soak.duration",
           _line_of(text, 'duration = "1200 V"'), "in s")  # fmt: skip


def test_design_reference_of_the_wrong_unit(tmp_path):
    text = TEXT.replace('current_limit = "0.2 A"', 'current_limit = "design.bus_voltage"')
    _fails(tmp_path, text, "stages.power-rails.steps.first-power.supply.current_limit",
           _line_of(text, 'current_limit = "design.bus_voltage"'), "is in V, not A")  # fmt: skip


def test_single_ended_probe_on_a_floating_net(tmp_path):
    old = f'vbs = {{ {ZOOM}, probe = "differential" }}'
    assert old in TEXT
    text = TEXT.replace(old, f"vbs = {{ {ZOOM} }}")
    _fails(tmp_path, text, "stages.droop-max-on-time.steps.droop.scope.nets.vbs.probe",
           _line_of(text, f"vbs = {{ {ZOOM} }}"), "floats")  # fmt: skip


def test_record_too_long(tmp_path):
    text = TEXT.replace("points = 100000", "points = 50000000", 1)
    _fails(tmp_path, text, "stages.power-rails.steps.rails-unloaded.scope.points",
           _line_of(text, "points = 50000000"), "between 1000 and 20000000")  # fmt: skip


def test_analysis_needs_its_nets(tmp_path):
    old = f'vbs = {{ {ZOOM}, probe = "differential" }}\n'
    assert old in TEXT
    text = TEXT.replace(old, "")
    _fails(tmp_path, text, "stages.droop-max-on-time.steps.droop.scope.nets",
           _line_of(text, "[stages.droop-max-on-time.steps.droop.scope.nets]"),
           "needs net 'vbs'")  # fmt: skip


def test_newer_checklist_schema(tmp_path):
    text = TEXT.replace("schema = 1", "schema = 3", 1)
    _fails(tmp_path, text, "schema", _line_of(text, "schema = 3"), "newer")


def test_syntax_error(tmp_path):
    text = TEXT.replace('title = "Thermal"', 'title = "Thermal', 1)
    path = tmp_path / "checklist.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError) as info:
        load_checklist(path)
    assert info.value.line == _line_of(text, 'title = "Thermal')
    assert "not valid TOML" in str(info.value)


def test_trigger_on_a_net_not_acquired(tmp_path):
    old = 'trigger = { net = "vgs", level = "0.7 * design.gate_drive_voltage", slope = "positive" }'
    assert old in TEXT
    text = TEXT.replace(old, old.replace('net = "vgs"', 'net = "logic"'))
    _fails(tmp_path, text, "stages.droop-max-on-time.steps.droop.scope.trigger.net",
           _line_of(text, 'net = "logic"', after="droop.scope]"), "not acquired")  # fmt: skip


def test_the_standard_checklist_names_its_id_title_and_version():
    checklist = load_checklist()
    assert checklist.id == "high-side-bootstrap"
    assert checklist.title == checklist.name == "High-side N-channel switch with bootstrap drive"
    assert checklist.version == "1.2"


def test_unknown_key_in_the_checklist_table(tmp_path):
    text = TEXT.replace('version = "1.2"', 'version = "1.2"\nrevision = "B"', 1)
    _fails(tmp_path, text, "checklist.revision", _line_of(text, 'revision = "B"'), "unknown key")


def test_a_version_must_be_a_version_string(tmp_path):
    text = TEXT.replace('version = "1.2"', "version = 1.2", 1)
    _fails(tmp_path, text, "checklist.version", _line_of(text, "version = 1.2"), "version string")
    text = TEXT.replace('version = "1.2"', 'version = "one point one"', 1)
    _fails(tmp_path, text, "checklist.version", _line_of(text, "one point one"), "version string")


def test_a_checklist_id_is_checked_like_a_stage_id(tmp_path):
    text = TEXT.replace('id = "high-side-bootstrap"', 'id = "High Side"', 1)
    _fails(tmp_path, text, "checklist.id", _line_of(text, 'id = "High Side"'), "lower-case")


def test_title_or_name_but_not_both(tmp_path):
    title = 'title = "High-side N-channel switch with bootstrap drive"'
    both = TEXT.replace(title, f'{title}\nname = "Another"', 1)
    _fails(tmp_path, both, "checklist.name", _line_of(both, 'name = "Another"'), "not both")
    neither = TEXT.replace(title + "\n", "", 1)
    _fails(tmp_path, neither, "checklist", _line_of(neither, "[checklist]"), "missing key 'title'")
    # name is the older spelling of title; without an id or a version the file still loads
    older = TEXT.replace(title, 'name = "Older file"', 1)
    older = older.replace('id = "high-side-bootstrap"\n', "", 1).replace('version = "1.2"\n', "", 1)
    path = tmp_path / "older.toml"
    path.write_text(older, encoding="utf-8")
    checklist = load_checklist(path)
    assert (checklist.title, checklist.id, checklist.version) == ("Older file", "older", None)


VGS_PWM = "pwm = { enabled = true, duty = 0.5 }"
VGS_SUPPLY = 'supply = { voltage = "design.bus_voltage", current_limit = "10 A" }'
FIRST_SUPPLY = 'supply = { voltage = "design.bus_voltage", current_limit = "0.2 A", ramp'
STEP_KEYS = "stages.gate-overdrive.steps.vgs-on"


@pytest.mark.parametrize(
    ("old", "new", "key", "problem"),
    [
        (VGS_PWM, "pwm = { enabled = true, duty = 1.5 }", "pwm.duty", "1.5 is out of range"),
        (VGS_PWM, "pwm = { enabled = true, duty = -0.5 }", "pwm.duty", "at most 1"),
        (VGS_SUPPLY, VGS_SUPPLY.replace('"10 A"', '"-0.2 A"'), "supply.current_limit",
         "-200 mA is out of range: must be above 0"),
        (VGS_SUPPLY, VGS_SUPPLY.replace('"10 A"', '"0 A"'), "supply.current_limit", "above 0"),
        (VGS_SUPPLY, VGS_SUPPLY.replace('"design.bus_voltage"', '"-24 V"'), "supply.voltage",
         "-24 V is out of range"),
        (VGS_SUPPLY, VGS_SUPPLY.replace('"design.bus_voltage"', '"24 V", ramp = ["12 V", "30 V"]'),
         "supply.ramp", "ramp step 30 V is above the final voltage 24 V"),
        (VGS_SUPPLY, VGS_SUPPLY.replace('"design.bus_voltage"', '"24 V"').replace(
            '"10 A"', '"10 A", ovp = "20 V"'
        ), "supply.ovp",
         "must be above the highest voltage set"),
    ],
)  # fmt: skip
def test_settings_written_directly_are_range_checked_on_load(tmp_path, old, new, key, problem):
    # Each of these loaded before and failed (or ran) with the supply on; now refused on load.
    head, tail = TEXT.split(f"[{STEP_KEYS}]")
    assert old in tail
    text = head + f"[{STEP_KEYS}]" + tail.replace(old, new, 1)
    line = _line_of(text, new, after=f"[{STEP_KEYS}]")
    _fails(tmp_path, text, f"{STEP_KEYS}.{key}", line, problem)


def test_soak_min_duration_longer_than_the_duration_is_refused(tmp_path):
    text = TEXT.replace('min_duration = "480 s"', 'min_duration = "2000 s"')
    _fails(tmp_path, text, "stages.thermal.steps.soak.soak.min_duration",
           _line_of(text, 'min_duration = "2000 s"'), "between 0 and the soak's duration")  # fmt: skip


def test_settings_given_as_design_expressions_are_checked_once_resolved(tmp_path):
    """ "2 * design.duty_max" loads (the board is not known yet) but resolves to 1.9 on the demo
    board: refused by the one validation pass before a session is created, naming the checklist
    file, line and key."""
    board = load_board("demo")
    old = 'pwm = { enabled = true, duty = "design.duty_max" }'
    text = TEXT.replace(old, old.replace('"design.duty_max"', '"2 * design.duty_max"'), 1)
    path = tmp_path / "checklist.toml"
    path.write_text(text, encoding="utf-8")
    checklist = load_checklist(path)
    with pytest.raises(ConfigError) as info:
        check_against_board(checklist, board)
    err = info.value
    assert err.key == "stages.power-rails.steps.rails-loaded.pwm.duty"
    assert err.line == _line_of(text, "2 * design.duty_max")
    assert "1.9 (2 * design.duty_max for this board) is out of range" in str(err)
    # a ramp step above the final voltage only once both are resolved
    ramp = '"0.75 * design.bus_voltage", "design.bus_voltage"]'
    text = TEXT.replace(ramp, '"0.75 * design.bus_voltage", "1.5 * design.bus_voltage"]')
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError, match="ramp step 36 V .* is above the final voltage 24 V"):
        check_against_board(load_checklist(path), board)
    assert FIRST_SUPPLY in TEXT
