"""``bringup instruments --check`` against the simulated bench: a good profile, a deliberately
wrong one, and a supply found powered (left as found). The supply output is never switched ON
by the check: the simulator's log of every line it received is the witness."""

from __future__ import annotations

import json

import pytest

from bringup.cli import main
from bringup.instruments.profiles import BUILTIN_DIR
from sim_instruments.bench import start_bench


@pytest.fixture
def dialect_sim(demo_design):
    started = []

    def start(**dialects):
        sim = start_bench(dict(demo_design), dialects=dialects)
        started.append(sim)
        return sim

    yield start
    for sim in started:
        sim.stop()


def _check(capsys, bench, *extra) -> tuple[int, dict]:
    status = main(["instruments", "--bench", str(bench), "--check", "--json", *extra])
    return status, json.loads(capsys.readouterr().out)


def _rows(report, role):
    return {row["operation"]: row for row in report["instruments"][role]["operations"]}


def _switched_on(lines):
    return [line for line in lines if line.upper().replace(" ", "").endswith(",ON")
            and "OUTP" in line.upper() and ":OVP" not in line.upper()
            and ":OCP" not in line.upper()]  # fmt: skip


@pytest.mark.parametrize(
    ("supply", "thermometer"), [("triple", "logger"), ("select", "dmm"), ("nullpoint", "nullpoint")]
)
def test_good_profiles_every_declared_operation_works(
    dialect_sim, tmp_path, capsys, supply, thermometer
):
    sim = dialect_sim(supply=supply, thermometer=thermometer)
    bench = tmp_path / "bench.toml"
    bench.write_text(sim.bench_file_text())
    status, report = _check(capsys, bench)
    assert status == 0 and report["healthy"], report
    for role in ("scope", "supply", "thermometer"):
        rows = _rows(report, role)
        assert rows["identify"]["status"] == "works"
        assert rows["error_query"]["note"] == "queue empty"
        assert {r["status"] for r in rows.values()} <= {"works", "absent"}
    supply_rows = _rows(report, "supply")
    assert supply_rows["output"]["status"] == "works"
    assert not sim.supply.output_on
    assert not _switched_on(sim.supply.received_lines())
    assert "OUTP ON" not in sim.supply.received_lines()
    # the settings were written back as read: the supply is as it was after *RST
    assert (sim.supply.voltage_set, sim.supply.current_limit) == (0.0, 1.0)


def test_a_wrong_profile_is_reported_operation_by_operation_with_line_and_reply(
    dialect_sim, tmp_path, capsys
):
    sim = dialect_sim(supply="triple")
    folder = tmp_path / "profiles"
    folder.mkdir()
    text = (BUILTIN_DIR / "triple-output-argument.toml").read_text()
    text = text.replace("YES = true\nNO = false", "TRUE = true\nFALSE = false", 1)
    text = text.replace(':OUTPut:OCP:VALue? {channel}"', ':OUTPut:OCP:LEVel? {channel}"')
    text = text.replace("default = 3000", "default = 3000\nocp_level = 300")
    (folder / "triple-output-argument.toml").write_text(text)
    bench = tmp_path / "bench.toml"
    bench.write_text(sim.bench_file_text())
    status, report = _check(capsys, bench, "--profiles", str(folder))
    assert status == 1 and not report["healthy"]
    rows = _rows(report, "supply")
    tripped = rows["ovp_tripped"]
    assert tripped["status"] == "failed"
    assert tripped["sent"] == ":OUTPut:OVP:QUES? CH2" and tripped["reply"] == "NO"
    assert "replies.ovp_tripped" in tripped["note"]
    assert str(folder / "triple-output-argument.toml") in tripped["note"]
    level = rows["ocp_level"]
    assert level["status"] == "failed" and level["sent"] == ":OUTPut:OCP:LEVel? CH2"
    assert "no reply in time" in (level["note"] or level["reply"])
    # what depends on a failed read is not sent: nothing is written blind
    assert rows["set_ocp"]["status"] == "not tried"
    assert rows["ovp_clear"]["status"] == "not tried"
    assert not any(line.startswith(":OUTPut:OCP:VALue CH2") for line in sim.supply.received_lines())
    assert not sim.supply.output_on and not _switched_on(sim.supply.received_lines())
    # and the table form names the failure with its line
    assert main(["instruments", "--bench", str(bench), "--check", "--profiles", str(folder)]) == 1
    out = capsys.readouterr().out
    assert "ovp_tripped" in out and "failed" in out and "sent ':OUTPut:OVP:QUES? CH2'" in out
    assert out.rstrip().endswith("some failed")


def test_a_powered_supply_is_left_as_found(dialect_sim, tmp_path, capsys):
    sim = dialect_sim(supply="select")
    with sim.supply.lock:
        fed = sim.supply.fed
        fed.voltage_set, fed.current_limit = 12.0, 1.0
        fed.turn_on(True)
    bench = tmp_path / "bench.toml"
    bench.write_text(sim.bench_file_text())
    before = len(sim.supply.received_lines())
    status, report = _check(capsys, bench)
    rows = _rows(report, "supply")
    assert rows["output_state"]["note"] == "means True"
    for operation in ("apply", "set_voltage", "set_ovp", "set_ocp", "sense"):
        assert rows[operation]["status"] == "not tried", rows[operation]
        assert "left as found" in rows[operation]["note"]
    assert sim.supply.output_on and sim.supply.voltage_set == 12.0
    sent = sim.supply.received_lines()[before:]
    assert not [line for line in sent if line.startswith(("APPL", "VOLT ", "CURR "))], sent
    assert status == 0  # nothing failed; the table says what was not tried and why


def test_json_without_check_is_refused_in_one_line(tmp_path, capsys, sim_bench):
    sim = sim_bench()
    bench = tmp_path / "bench.toml"
    bench.write_text(sim.bench_file_text())
    assert main(["instruments", "--bench", str(bench), "--json"]) == 2
    assert "--json goes with --check" in capsys.readouterr().err
