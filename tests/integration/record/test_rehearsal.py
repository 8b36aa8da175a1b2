"""A session on a simulated bench is a rehearsal: said on every page of every format and in
``bringup sessions``, and never read as an accepted board. Records signed before the mark was
added (``bringup-record/1``) still verify."""

from __future__ import annotations

import base64
import datetime as dt
import json
from pathlib import Path

import pytest
from pypdf import PdfReader
from record_samples import Keys, Session, write_session

from bringup.cli import main
from bringup.record.compare import content_digest
from bringup.record.from_log import content_from_log
from bringup.record.keys import load_private_key
from bringup.record.schemas import content_as
from bringup.record.signing import make_signature
from bringup.store import SessionLog

MARK = "REHEARSAL on a simulated bench"


def _export(s: Session, fmt: str, out: Path) -> Path:
    args = ["export", s.session_id, "--db", str(s.db), "--format", fmt, "--out", str(out)]
    assert main(args) == 0
    return out


@pytest.fixture
def rehearsal(tmp_path: Path) -> Session:
    """The sample session (every step accepted, a waiver, a skip) on a simulated bench."""
    return write_session(tmp_path / "sim.db", simulated=True)


def test_rehearsal_json_says_rehearsal_and_never_accepted(
    rehearsal: Session, tmp_path: Path
) -> None:
    record = json.loads(_export(rehearsal, "json", tmp_path / "r.json").read_text())
    assert record["schema"] == "bringup-record/3"
    content = record["content"]
    assert content["session"]["rehearsal"] is True
    assert content["bench"]["simulated"] is True
    # the same steps on a real bench read accepted-with-exceptions (test_export_sign_verify)
    assert content["summary"]["overall"] == "rehearsed-with-exceptions"


def test_every_pdf_page_is_marked_and_no_page_reads_accepted(
    rehearsal: Session, tmp_path: Path
) -> None:
    reader = PdfReader(_export(rehearsal, "pdf", tmp_path / "r.pdf"))
    pages = [p.extract_text() for p in reader.pages]
    assert len(pages) >= 5
    for n, text in enumerate(pages, start=1):
        lines = text.splitlines()
        # in the header (the first lines) and the footer (the last lines) of each page
        assert any(MARK in line for line in lines[:3]), f"page {n}: no mark in its header"
        assert any(MARK in line for line in lines[-4:]), f"page {n}: no mark in its footer"
        assert "ACCEPTED" not in text, f"page {n} reads ACCEPTED"
    assert "REHEARSAL PASSED WITH EXCEPTIONS" in pages[0]


def test_html_banner_and_no_accepted(rehearsal: Session, tmp_path: Path) -> None:
    html = _export(rehearsal, "html", tmp_path / "r.html").read_text()
    body = html[html.index("<body") :]
    assert body.index('<p class="rehearsal" id="rehearsal">') < body.index("<h1>")
    assert MARK in body and "<title>Rehearsal record" in html
    assert "ACCEPTED" not in html


def test_real_bench_record_carries_no_rehearsal_mark(session: Session, tmp_path: Path) -> None:
    pages = [p.extract_text() for p in PdfReader(_export(session, "pdf", tmp_path / "b.pdf")).pages]
    assert not any("REHEARSAL" in text for text in pages)
    # measured and judged, nobody signed: passed, never accepted (issue 13)
    assert "PASSED WITH EXCEPTIONS" in pages[0] and "NOT SIGNED" in pages[0]
    assert "ACCEPTED" not in pages[0]
    assert "REHEARSAL" not in _export(session, "html", tmp_path / "b.html").read_text()


def test_sessions_lists_the_rehearsal_as_one(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    db = tmp_path / "both.db"
    board = write_session(db)
    sim = write_session(db, simulated=True)
    capsys.readouterr()
    assert main(["sessions", "--db", str(db), "--json"]) == 0
    rows = {r["id"]: r for r in json.loads(capsys.readouterr().out)}
    assert rows[sim.session_id]["rehearsal"] is True
    assert rows[sim.session_id]["bench"] == "simulated"
    assert rows[board.session_id]["rehearsal"] is False
    assert rows[board.session_id]["bench"] == "real"
    assert main(["sessions", "--db", str(db)]) == 0
    lines = {line.split()[0]: line for line in capsys.readouterr().out.splitlines()[1:]}
    assert "rehearsal: " in lines[sim.session_id]
    assert "rehearsal" not in lines[board.session_id]


def test_a_record_signed_before_the_mark_still_verifies_and_reexports(
    rehearsal: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """A sign-off made by the previous version (on ``bringup-record/1`` content) keeps
    verifying: the session re-exports in that schema, and ``verify --db`` compares with the
    content that schema holds."""
    with SessionLog.open(rehearsal.db, create=False) as log:
        content, _ = content_from_log(log, rehearsal.session_id)
        old = content_as(content, "bringup-record/1")
        assert "rehearsal" not in old["session"] and old["summary"]["overall"] == (
            "accepted-with-exceptions"
        )
        pair = load_private_key(keys.operator)
        entry = make_signature(
            old, pair, "operator", "2026-12-01T22:30:00.000000Z", "bringup-record/1"
        )
        log.add_signature(
            rehearsal.session_id,
            name=entry["name"],
            role="operator",
            signed_utc=dt.datetime(2026, 12, 1, 22, 30, tzinfo=dt.UTC),
            public_key=pair.public.raw,
            fingerprint=entry["key_fingerprint"],
            signature=base64.b64decode(entry["signature"]),
            content_digest=content_digest(old),
            statement={k: entry[k] for k in ("meaning", "local_offset") if k in entry},
        )
    out = _export(rehearsal, "json", tmp_path / "old.json")
    assert json.loads(out.read_text())["schema"] == "bringup-record/1"
    capsys.readouterr()
    key = ["--key", f"{keys.operator}.pub"]
    assert main(["verify", str(out), "--db", str(rehearsal.db), *key]) == 0, capsys.readouterr().out
    # the page still says rehearsal even though the old content's word is "accepted"
    pdf = _export(rehearsal, "pdf", tmp_path / "old.pdf")
    first = PdfReader(pdf).pages[0].extract_text()
    assert MARK in first and "ACCEPTED" not in first
    # the reviewer signs the same (old) content, so both sign-offs verify in one record
    reviewer = ["sign", rehearsal.session_id, "--db", str(rehearsal.db)]
    assert main([*reviewer, "--key", str(keys.reviewer), "--role", "reviewer"]) == 0
    again = _export(rehearsal, "json", tmp_path / "both.json")
    assert json.loads(again.read_text())["schema"] == "bringup-record/1"
    both = [*key, "--key", f"{keys.reviewer}.pub"]
    assert main(["verify", str(again), "--db", str(rehearsal.db), *both]) == 0
