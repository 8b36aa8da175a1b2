"""Reading the lab with ``--lab``: ``sessions``, ``export`` and ``verify`` give what they give on
the bench's own log (the records byte for byte, so the bench's signatures verify), every chain
is re-checked on what was read from the server, and two benches' equal session ids stay apart.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import shutil

import psycopg
import pytest
from lab_samples import add_session, bringup, make_log

from bringup.cli import main
from bringup.store import SessionLog


def _cli(capsys, *args: str) -> tuple[int, str, str]:
    capsys.readouterr()
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def rehearsal_folder(tmp_path_factory):
    """A real headless run on the simulated bench, signed by two people (made once)."""
    folder = tmp_path_factory.mktemp("rehearsal")
    db = folder / "bench.db"
    steps = [
        ("run", "--sim", "--auto", "--serial", "DHS24-0031", "--operator", "Ana Ortiz",
         "--seed", "4", "--db", str(db)),
        ("keygen", "--name", "Ana Ortiz", "--out", str(folder / "ana.key")),
        ("keygen", "--name", "Ravi Rao", "--out", str(folder / "ravi.key")),
        ("sign", "--last", "--key", str(folder / "ana.key"), "--role", "operator",
         "--db", str(db)),
        ("sign", "--last", "--key", str(folder / "ravi.key"), "--role", "reviewer",
         "--db", str(db)),
    ]  # fmt: skip
    done = bringup(*steps[0], env=dict(os.environ), cwd=folder)  # a real run, its own process
    assert done.returncode == 0, (done.stdout, done.stderr)
    for args in steps[1:]:  # keys and sign-offs in this process (no bench involved)
        with contextlib.redirect_stdout(io.StringIO()) as said:
            assert main(list(args)) == 0, (args, said.getvalue())
    return folder


@pytest.fixture
def signed_rehearsal(lab_db, rehearsal_folder, tmp_path, capsys):
    """The signed rehearsal's log (a copy, with its keys) pushed to this test's lab."""
    for item in rehearsal_folder.iterdir():
        if item.is_file():
            shutil.copy(item, tmp_path / item.name)
    db = tmp_path / "bench.db"
    code, out, err = _cli(
        capsys, "push", "--lab", lab_db.url, "--db", str(db), "--bench-name", "bench-a"
    )
    assert code == 0, err
    return db


def test_records_from_the_lab_are_the_benchs_byte_for_byte_and_verify(
    lab_db, signed_rehearsal, tmp_path, capsys
):
    db = signed_rehearsal
    for fmt in ("json", "html", "pdf"):
        here, there = tmp_path / f"bench.{fmt}", tmp_path / f"lab.{fmt}"
        assert _cli(capsys, "export", "--last", "--format", fmt, "--db", str(db),
                    "--out", str(here))[0] == 0  # fmt: skip
        assert _cli(capsys, "export", "--last", "--format", fmt, "--lab", lab_db.url,
                    "--out", str(there))[0] == 0  # fmt: skip
        assert there.read_bytes() == here.read_bytes(), fmt
    keys = ("--key", str(tmp_path / "ana.key.pub"), "--key", str(tmp_path / "ravi.key.pub"))
    code, out, err = _cli(capsys, "verify", str(tmp_path / "lab.pdf"), "--lab", lab_db.url, *keys)
    assert code == 0, out + err
    assert f"lab {lab_db.url.split('@')[0]}@" in out and "chain intact, head matches" in out
    code, bench_json, _ = _cli(capsys, "sessions", "--json", "--db", str(db))
    code, lab_json, _ = _cli(capsys, "sessions", "--json", "--lab", lab_db.url)
    listed = json.loads(lab_json)
    assert [row.pop("bench_name") for row in listed] == ["bench-a"]
    assert listed == json.loads(bench_json)


def _tamper_in_the_lab(lab_db) -> None:
    """A lab administrator (the superuser) switches the triggers off and edits a metric."""
    with lab_db.server.admin(lab_db.name) as conn:
        conn.execute("ALTER TABLE bringup.metrics DISABLE TRIGGER USER")
        conn.execute(
            "UPDATE bringup.metrics SET value = value * 0.5 WHERE attempt = "
            "(SELECT min(attempt) FROM bringup.metrics)"
        )
        conn.execute("ALTER TABLE bringup.metrics ENABLE TRIGGER USER")


def test_a_chain_broken_in_the_lab_is_found_on_what_was_read(
    lab_db, signed_rehearsal, tmp_path, capsys
):
    db = signed_rehearsal
    record = tmp_path / "record.json"
    assert _cli(capsys, "export", "--last", "--db", str(db), "--out", str(record))[0] == 0
    _tamper_in_the_lab(lab_db)
    code, out, err = _cli(capsys, "verify", str(record), "--lab", lab_db.url)
    assert code == 1
    assert "CHANGED: log chain: session" in out and "'metric:" in out
    code, out, err = _cli(capsys, "export", "--last", "--lab", lab_db.url, "--out", "-")
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and "does not match its hash" in err
    code, out, err = _cli(capsys, "sessions", "--lab", lab_db.url)
    assert code == 2 and len(err.strip().splitlines()) == 1 and "do not hold" in err
    # the bench's own log is untouched and still exports
    assert _cli(capsys, "export", "--last", "--db", str(db), "--out", "-")[0] == 0


def test_two_benches_with_the_same_session_id_stay_apart(lab_db, tmp_path, capsys, monkeypatch):
    """Short ids are random per log: two benches can draw the same one. The lab keeps both
    (each under its log's identity), lists them as BENCH/ID and exports each as its bench
    does; the bare id is refused as ambiguous, naming both."""
    same = "261201-abcd"
    monkeypatch.setattr(SessionLog, "_new_session_id", lambda self: same)
    paths = {}
    for bench, seed in (("bench-a", 1), ("bench-b", 2)):
        paths[bench] = tmp_path / f"{bench}.db"
        with SessionLog.open(paths[bench]) as log:
            add_session(log, f"DHS24-{seed:04d}", seed)
        code, out, err = _cli(
            capsys, "push", "--lab", lab_db.url, "--db", str(paths[bench]), "--bench-name", bench
        )
        assert code == 0, err
    code, out, _ = _cli(capsys, "sessions", "--json", "--lab", lab_db.url)
    listed = {(row["bench_name"], row["id"], row["serial"]) for row in json.loads(out)}
    assert listed == {
        ("bench-a", f"bench-a/{same}", "DHS24-0001"),
        ("bench-b", f"bench-b/{same}", "DHS24-0002"),
    }
    code, out, err = _cli(capsys, "export", same, "--lab", lab_db.url, "--out", "-")
    assert code == 2 and f"matches 2 sessions (bench-a/{same}, bench-b/{same})" in err
    lab_copy, own = tmp_path / "lab.json", tmp_path / "own.json"
    assert _cli(capsys, "export", f"bench-b/{same}", "--lab", lab_db.url,
                "--out", str(lab_copy))[0] == 0  # fmt: skip
    assert _cli(capsys, "export", same, "--db", str(paths["bench-b"]),
                "--out", str(own))[0] == 0  # fmt: skip
    assert lab_copy.read_bytes() == own.read_bytes()
    assert json.loads(own.read_text())["content"]["session"]["serial"] == "DHS24-0002"
    # the record names the bare id; its genesis hash tells the lab which of the two it is
    # (the samples' sign-off bytes are not real signatures: only the log findings matter here)
    code, out, err = _cli(capsys, "verify", str(lab_copy), "--lab", lab_db.url)
    assert [line for line in out.splitlines() if line.startswith("CHANGED: log")] == [], out
    assert out.count("CHANGED: signature") == 4


def test_an_empty_lab_and_a_lab_without_tables_say_so_in_one_line(lab_db, tmp_path, capsys):
    code, out, err = _cli(capsys, "sessions", "--lab", lab_db.url)
    assert code == 2 and "no bringup tables there yet" in err and len(err.splitlines()) == 1
    # a bench log with no session yet has nothing to push (and no identity in a lab)
    SessionLog.open(tmp_path / "empty.db").close()
    code, out, err = _cli(capsys, "push", "--lab", lab_db.url, "--db", str(tmp_path / "empty.db"))
    assert code == 0 and "0 session(s) sent" in out
    # with one session the tables are made and the lab lists it
    make_log(tmp_path / "one.db", 1)
    assert _cli(capsys, "push", "--lab", lab_db.url, "--db", str(tmp_path / "one.db"))[0] == 0
    code, out, err = _cli(capsys, "sessions", "--lab", lab_db.url, "--json")
    assert code == 0 and [row["serial"] for row in json.loads(out)] == ["DHS24-0000"]
    with psycopg.connect(lab_db.url) as conn:
        assert conn.execute("SELECT count(*) FROM bringup.logs").fetchone()[0] == 1


def test_a_large_lab_is_copied_in_groups_and_lists_as_the_log_does(
    lab_db, tmp_path, capsys, monkeypatch
):
    import bringup.lab.reading as lab_reading

    db = tmp_path / "bench.db"
    make_log(db, 5)
    assert _cli(capsys, "push", "--lab", lab_db.url, "--db", str(db))[0] == 0
    monkeypatch.setattr(lab_reading, "COPY_GROUP", 2)  # five sessions in three transactions
    code, lab_json, err = _cli(capsys, "sessions", "--json", "--lab", lab_db.url)
    assert code == 0, err
    code, bench_json, _ = _cli(capsys, "sessions", "--json", "--db", str(db))
    listed = json.loads(lab_json)
    for row in listed:
        row.pop("bench_name")
    assert listed == json.loads(bench_json) and len(listed) == 5


def test_tables_of_a_newer_bringup_are_refused_in_one_line(lab_db, tmp_path, capsys):
    db = tmp_path / "bench.db"
    make_log(db, 1)
    assert _cli(capsys, "push", "--lab", lab_db.url, "--db", str(db))[0] == 0
    with lab_db.server.admin(lab_db.name) as admin:
        admin.execute("INSERT INTO bringup.lab_version (version) VALUES (99)")
    for args in (("sessions",), ("push", "--db", str(db))):
        code, out, err = _cli(capsys, *args, "--lab", lab_db.url)
        assert code == 2 and len(err.strip().splitlines()) == 1, err
        assert "tables are version 99" in err and "upgrade bringup" in err
