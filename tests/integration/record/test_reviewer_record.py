"""The record a reviewer receives (issue 13): who did what, the calibration state, the record's
size, and a layout read in one minute (cautions once, no orphan pages, no overlapping text).

Every session here is written through the real session log into a real SQLite file, signed
with real Ed25519 keys and exported by the real command; the PDF is read back with pypdf.
"""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import json
import re
import zlib
from pathlib import Path

import numpy as np
import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from pdf_text_boxes import TextBox, overlapping, page_boxes
from pypdf import PdfReader
from record_samples import BENCH, CHECKLIST, Keys, Session, write_session

from bringup.cli import main
from bringup.record.export_pdf import render_pdf
from bringup.record.from_log import open_log, record_from_log, sign_session
from bringup.record.keys import fingerprint, load_private_key, raw_public_bytes
from bringup.record.rfc8785 import canonical_bytes
from bringup.store import SessionLog


def _export(s: Session, fmt: str, out: Path) -> Path:
    args = ["export", s.session_id, "--db", str(s.db), "--format", fmt, "--out", str(out)]
    assert main(args) == 0
    return out


def _sign(s: Session, key: Path, role: str, now: dt.datetime | None = None) -> dict:
    with open_log(s.db) as log:
        return sign_session(log, s.session_id, key, role, now=now)


def _first_page(s: Session, tmp_path: Path, name: str) -> str:
    """Page 1's text with line and cell breaks as single spaces."""
    text = PdfReader(_export(s, "pdf", tmp_path / name)).pages[0].extract_text()
    return " ".join(text.split())


# --- outcome states: who did what -------------------------------------------------------------


def test_accepted_only_once_a_second_person_reviewed(
    session: Session, keys: Keys, tmp_path: Path
) -> None:
    """Measured and judged, then signed by the operator, then reviewed: only the last reads
    ACCEPTED, and the page names who performed and who reviewed (21 CFR Part 11 §11.50)."""
    unsigned = _first_page(session, tmp_path, "0.pdf")
    assert "Outcome: PASSED WITH EXCEPTIONS" in unsigned and "NOT SIGNED" in unsigned
    assert "ACCEPTED" not in unsigned
    _sign(session, keys.operator, "operator")
    signed = _first_page(session, tmp_path, "1.pdf")
    assert "SIGNED BY THE OPERATOR" in signed and "ACCEPTED" not in signed
    assert "Performed by R. Okafor" in signed and "Not reviewed by a second person yet." in signed
    _sign(session, keys.reviewer, "reviewer")
    reviewed = _first_page(session, tmp_path, "2.pdf")
    assert "Outcome: ACCEPTED WITH EXCEPTIONS" in reviewed
    assert "Reviewed and approved by M. Lindqvist" in reviewed


def test_a_signature_states_its_meaning_and_local_time_and_covers_them(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """§11.50: printed name, date and time, meaning; §11.70: bound to the record, so an
    edited meaning no longer verifies."""
    tz = dt.timezone(dt.timedelta(hours=2))
    entry = _sign(
        session, keys.operator, "operator", now=dt.datetime(2026, 12, 4, 20, 5, tzinfo=tz)
    )
    assert entry["signed_at"] == "2026-12-04T18:05:00.000000Z"
    assert entry["local_offset"] == "+02:00" and entry["meaning"].startswith("performed")
    text = _first_page(session, tmp_path, "s.pdf")
    assert "2026-12-04 18:05:00 UTC (local UTC+02:00)" in text and "performed" in text
    record = json.loads(_export(session, "json", tmp_path / "r.json").read_text())
    (sig,) = record["signatures"]
    assert sig["meaning"] == entry["meaning"] and sig["local_offset"] == "+02:00"
    record["signatures"][0]["meaning"] = (
        "reviewed and approved: checked this record and approves its outcome"
    )
    edited = tmp_path / "edited.json"
    edited.write_bytes(canonical_bytes(record) + b"\n")
    capsys.readouterr()
    assert main(["verify", str(edited), "--key", f"{keys.operator}.pub"]) == 1
    assert "signature 1 (operator R. Okafor)" in capsys.readouterr().out


def test_a_sign_off_made_before_meanings_still_verifies(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """A signature over the four fields earlier versions signed (name, role, time, key),
    made here by hand with Ed25519 (RFC 8032) over the canonical statement SCHEMA.md
    defines, keeps verifying; the page says its meaning comes from its role."""
    pair = load_private_key(keys.operator)
    with SessionLog.open(session.db, create=False) as log:
        content = record_from_log(log, session.session_id)["content"]
        signer = {"name": pair.name, "role": "operator", "signed_at": "2026-12-04T09:00:00.000000Z",
                  "key_fingerprint": pair.public.fingerprint}  # fmt: skip
        statement = {"purpose": "bringup-record/3 sign-off", "content": content, "signer": signer}
        signature = pair.private.sign(canonical_bytes(statement))
        log.add_signature(
            session.session_id, name=pair.name, role="operator", signed_utc=signer["signed_at"],
            public_key=pair.public.raw, fingerprint=signer["key_fingerprint"],
            signature=signature, content_digest=hashlib.sha256(canonical_bytes(content)).hexdigest(),
        )  # fmt: skip
    out = _export(session, "json", tmp_path / "old.json")
    assert "meaning" not in json.loads(out.read_text())["signatures"][0]
    capsys.readouterr()
    key = ["--key", f"{keys.operator}.pub"]
    assert main(["verify", str(out), "--db", str(session.db), *key]) == 0, capsys.readouterr().out
    assert "by its role; the signature states no meaning" in _first_page(session, tmp_path, "o.pdf")


def test_a_review_by_someone_who_ran_the_session_does_not_accept(
    session: Session, tmp_path: Path
) -> None:
    """The reviewer's key is another key, but the name is of someone who logged entries in
    the session (the waiver's M. Lindqvist is a decision-maker, R. Okafor ran it): a key made
    for R. Okafor under another file still cannot review."""
    from bringup.record.keys import generate_key_pair

    generate_key_pair("R. Okafor", tmp_path / "me.key")
    generate_key_pair("r.  okafor", tmp_path / "me-again.key")
    _sign(session, tmp_path / "me.key", "operator")
    with pytest.raises(Exception, match="another person"):
        _sign(session, tmp_path / "me-again.key", "reviewer")
    # a forged reviewer entry in the file (a signature the log never held) counts for nothing
    record = json.loads(_export(session, "json", tmp_path / "r.json").read_text())
    other = Ed25519PrivateKey.generate()
    record["signatures"].append({**record["signatures"][0], "role": "reviewer", "name": "X",
                                 "key_fingerprint": fingerprint(other.public_key()),
                                 "public_key": base64.b64encode(raw_public_bytes(other.public_key())).decode()})  # fmt: skip
    pdf = tmp_path / "forged.pdf"
    pdf.write_bytes(render_pdf(record))
    first = PdfReader(pdf).pages[0].extract_text()
    assert "ACCEPTED" not in first and "does NOT verify" in first


def test_a_rehearsal_is_never_accepted_even_when_reviewed(keys: Keys, tmp_path: Path) -> None:
    s = write_session(tmp_path / "sim.db", simulated=True)
    _sign(s, keys.operator, "operator")
    _sign(s, keys.reviewer, "reviewer")
    first = _first_page(s, tmp_path, "r.pdf")
    assert "REHEARSAL PASSED WITH EXCEPTIONS" in first and "(reviewed)" in first
    assert "ACCEPTED" not in first and "none accepted" in first


# --- calibration -------------------------------------------------------------------------------


def _bench_with_calibration(today: dt.date) -> dict:
    """The sample bench with the scope past due, the supply without a date and the
    thermometer in date with its certificate (dates relative to today: the session starts
    today)."""
    bench = json.loads(json.dumps(BENCH))
    bench["scope"]["calibration_due"] = (today - dt.timedelta(days=30)).isoformat()
    bench["scope"]["calibration_certificate"] = "CAL-7731"
    bench["supply"].pop("calibration_due", None)
    bench["thermometer"]["calibration_due"] = (today + dt.timedelta(days=200)).isoformat()
    bench["thermometer"]["calibration_certificate"] = "TC-0042/26"
    return bench


def test_calibration_past_due_or_undated_is_flagged_on_the_front_page(tmp_path: Path) -> None:
    today = dt.datetime.now(dt.UTC).date()
    s = write_session(tmp_path / "cal.db", bench=_bench_with_calibration(today))
    record = json.loads(_export(s, "json", tmp_path / "c.json").read_text())
    states = {i["id"]: i["calibration"]["state"] for i in record["content"]["bench"]["instruments"]}
    assert states == {"scope": "past-due", "supply": "no-date", "thermometer": "in-date"}
    scope = next(i for i in record["content"]["bench"]["instruments"] if i["id"] == "scope")
    assert scope["calibration_certificate"] == "CAL-7731"
    first = _first_page(s, tmp_path, "c.pdf")
    flags = first.split("FLAG: ")[1:]
    assert len(flags) == 2, first
    assert flags[0].startswith("Calibration of the scope: PAST DUE on ")
    assert "certificate CAL-7731" in flags[0]
    assert flags[1].startswith("Calibration of the supply: NO DUE DATE GIVEN")
    assert "in date" in first and "TC-0042/26" in first


def test_a_rehearsal_bench_needs_no_calibration(tmp_path: Path) -> None:
    s = write_session(tmp_path / "sim.db", simulated=True)
    first = _first_page(s, tmp_path, "r.pdf")
    assert "FLAG:" not in first and "simulated: no calibration applies" in first


# --- size: compressed, hashed waveforms ----------------------------------------------------------


def test_waveforms_are_compressed_and_decode_as_schema_md_says(
    session: Session, tmp_path: Path
) -> None:
    """SCHEMA.md: codes = zlib-decompress(base64-decode(codes_zlib_b64)), little-endian
    ``dtype``; SHA-256 of those bytes = ``raw_sha256``; the codes equal the log's."""
    out = _export(session, "json", tmp_path / "r.json")
    record = json.loads(out.read_text())
    plain = packed = 0
    with SessionLog.open(session.db, create=False) as log:
        by_key = {
            (a.stage_id, a.step_id, a.attempt_no): a for a in log.attempts(session.session_id)
        }
        for stage in record["content"]["stages"]:
            for step in stage["steps"]:
                for attempt in step["attempts"]:
                    for wave in attempt["waveforms"]:
                        assert "codes_b64" not in wave
                        raw = zlib.decompress(base64.b64decode(wave["codes_zlib_b64"]))
                        assert hashlib.sha256(raw).hexdigest() == wave["raw_sha256"]
                        codes = np.frombuffer(raw, np.dtype(wave["dtype"]).newbyteorder("<"))
                        logged = by_key[(stage["id"], step["id"], attempt["number"])]
                        stored = log.load_waveform(logged.id, wave["name"]).codes
                        assert np.array_equal(codes, stored)
                        plain += len(base64.b64encode(raw))
                        packed += len(wave["codes_zlib_b64"])
    # the sample waveforms carry wide-band noise over many code bits, the worst case for any
    # lossless coder, and still shrink (a simulated rehearsal's records shrink about tenfold)
    assert plain > 0 and packed < 0.8 * plain


def test_an_edited_waveform_is_named(session: Session, keys: Keys, tmp_path: Path,
                                     capsys: pytest.CaptureFixture[str]) -> None:  # fmt: skip
    _sign(session, keys.operator, "operator")
    record = json.loads(_export(session, "json", tmp_path / "r.json").read_text())
    wave = record["content"]["stages"][1]["steps"][0]["attempts"][-1]["waveforms"][0]
    codes = bytearray(zlib.decompress(base64.b64decode(wave["codes_zlib_b64"])))
    codes[10] ^= 0x01
    wave["codes_zlib_b64"] = base64.b64encode(zlib.compress(bytes(codes), 9)).decode()
    edited = tmp_path / "e.json"
    edited.write_bytes(canonical_bytes(record) + b"\n")
    capsys.readouterr()
    assert main(["verify", str(edited)]) == 1
    out = capsys.readouterr().out
    assert "codes do not hash to raw_sha256" in out and "does not verify" in out


# --- layout ------------------------------------------------------------------------------------


def test_cautions_once_per_stage_and_none_on_the_summary_page(
    session: Session, tmp_path: Path
) -> None:
    pages = [p.extract_text() for p in PdfReader(_export(session, "pdf", tmp_path / "r.pdf")).pages]
    assert "CAUTION" not in pages[0]
    text = re.sub(r"\s+", " ", " ".join(pages))
    for stage in CHECKLIST["stages"]:
        for caution in stage.get("cautions") or []:
            assert text.count(caution) == 1, caution


def _body_fill(boxes: list[TextBox], height: float) -> float:
    """How far down the page body the lowest text between the running head and the footer
    reaches, as a fraction of the body's height (A4: 842 pt; head and foot zones 26 mm)."""
    top, bottom = height - 26 / 25.4 * 72, 26 / 25.4 * 72
    body = [b for b in boxes if bottom < b.y0 and b.y1 < top]
    lowest = min((b.y0 for b in body), default=top)
    return (top - lowest) / (top - bottom)


def test_no_orphan_pages_and_the_summary_stands_alone(session: Session, tmp_path: Path) -> None:
    path = _export(session, "pdf", tmp_path / "r.pdf")
    reader = PdfReader(path)
    boxes = page_boxes(path)
    texts = [p.extract_text() for p in reader.pages]
    assert "Summary" in texts[0] and "Signatures" in texts[0]
    assert texts[1].split("\n")[1].startswith("Cautions") or "Cautions" in texts[1][:200]
    height = float(reader.pages[0].mediabox.height)
    for n, page_boxes_ in enumerate(boxes[1:-1], start=2):
        # a figure that does not fit starts a page (a 67 mm plot of a 251 mm body), and a stage
        # needs 100 mm for its heading, cautions and first step: every page but the last is
        # more than half full
        assert _body_fill(page_boxes_, height) > 0.5, f"page {n} is an orphan: {texts[n - 1][:200]}"


def _crowded_record(session: Session) -> dict:
    """The sample record with the overview's worst case: two edges' 10/50/90 % crossings a
    few nanoseconds apart in a microsecond record, and levels close together."""
    with open_log(session.db) as log:
        record = record_from_log(log, session.session_id)
    step = next(s for s in record["content"]["stages"][2]["steps"] if s["id"] == "switch-rise")
    wave = step["attempts"][-1]["waveforms"][0]
    wave["markers"] = [
        {"kind": "level", "label": "high", "y": 24.0},
        {"kind": "level", "label": "90 %", "y": 21.6},
        {"kind": "level", "label": "mid", "y": 12.0},
        *({"kind": "time", "label": f"{p} %", "t": t0 + k * 4e-9}
          for t0 in (-1.0e-7, -0.9e-7) for k, p in enumerate((10, 50, 90))),
        {"kind": "level", "label": "10 %", "y": 2.4},
        {"kind": "level", "label": "low", "y": 0.1},
    ]  # fmt: skip
    return record


def test_no_text_overlaps_on_any_page_even_with_crowded_plot_labels(
    session: Session, tmp_path: Path
) -> None:
    pdf = tmp_path / "crowded.pdf"
    pdf.write_bytes(render_pdf(_crowded_record(session)))
    pages = page_boxes(pdf)
    for n, boxes in enumerate(pages, start=1):
        clash = overlapping(boxes)
        assert not clash, f"page {n}: " + "; ".join(f"{a.text!r} over {b.text!r}" for a, b in clash)
    labels = [b.text for boxes in pages for b in boxes]
    for label in ("10 %", "50 %", "90 %", "high", "mid", "low"):
        assert label in labels, label


def test_the_overlap_check_finds_overlapping_text(tmp_path: Path) -> None:
    """The measuring tool itself: two runs drawn at one place are found, two apart are not."""
    from fpdf import FPDF

    pdf = FPDF()
    pdf.add_page()
    pdf.set_font("Helvetica", size=10)
    pdf.text(20, 20, "90 %")
    pdf.text(24, 21, "50 %")  # 4 mm right, 1 mm down: the boxes share an area
    pdf.text(20, 60, "10 %")
    pdf.text(40, 60, "mid")
    path = tmp_path / "t.pdf"
    pdf.output(str(path))
    (boxes,) = page_boxes(path)
    assert [(a.text, b.text) for a, b in overlapping(boxes)] == [("90 %", "50 %")]


def test_verify_says_who_did_what_and_the_calibration(
    keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The reviewer's one command on the one PDF: who performed, who reviewed (with meaning
    and time), the bench's kind and each instrument's calibration."""
    today = dt.datetime.now(dt.UTC).date()
    s = write_session(tmp_path / "cal.db", bench=_bench_with_calibration(today))
    _sign(s, keys.operator, "operator")
    _sign(s, keys.reviewer, "reviewer")
    pdf = _export(s, "pdf", tmp_path / "r.pdf")
    capsys.readouterr()
    assert (
        main(["verify", str(pdf), "--key", f"{keys.operator}.pub", "--key", f"{keys.reviewer}.pub"])
        == 0
    )
    out = capsys.readouterr().out
    assert "outcome: ACCEPTED WITH EXCEPTIONS" in out
    assert re.search(
        r"signed: R\. Okafor as operator \(performed\) at \S+ \S+ UTC \(local UTC[+-]\d\d:\d\d\)",
        out,
    )
    assert "signed: M. Lindqvist as reviewer (reviewed and approved)" in out
    assert "bench: real instruments" in out
    assert "calibration: scope: PAST DUE" in out and "calibration: supply: NO DUE DATE GIVEN" in out
    assert "SHA256:" not in out  # keys by their key id


# --- the HTML rehearsal banner on paper ---------------------------------------------------------


def _print_rules(html: str) -> str:
    """The CSS inside the page's ``@media print`` block."""
    css = html[html.index("<style>") + 7 : html.index("</style>")]
    start = css.index("@media print{") + len("@media print{")
    depth, end = 1, start
    while depth:
        depth += {"{": 1, "}": -1}.get(css[end], 0)
        end += 1
    return css[start : end - 1]


def test_the_rehearsal_banner_is_printed_on_every_page(tmp_path: Path) -> None:
    """Printed, a fixed-position element repeats at the top of every page (CSS 2.1 §9.6.1,
    "fixed" in paged media); backgrounds print only with print-color-adjust: exact (CSS Color
    Adjustment Level 1). Nothing hides the banner in print."""
    s = write_session(tmp_path / "sim.db", simulated=True)
    html = _export(s, "html", tmp_path / "r.html").read_text()
    rules = _print_rules(html)
    fixed = re.search(r"#rehearsal\{([^}]*)\}", rules)
    assert fixed is not None and "position:fixed" in fixed.group(1) and "top:0" in fixed.group(1)
    assert re.search(r"\.rehearsal[^{]*\{[^}]*print-color-adjust:exact", rules)
    assert "display:none" not in rules and "visibility:hidden" not in rules
    assert (
        '<body class="rehearsal-record">' in html and "body.rehearsal-record{padding-top" in rules
    )
    assert '<p class="rehearsal" id="rehearsal">' in html


@pytest.mark.skipif(not Path("/usr/bin/chromium").exists(), reason="no /usr/bin/chromium here")
def test_a_printed_rehearsal_says_so_on_every_page(tmp_path: Path) -> None:
    import subprocess

    s = write_session(tmp_path / "sim.db", simulated=True)
    html = _export(s, "html", tmp_path / "r.html")
    profile, printed = tmp_path / "profile", tmp_path / "printed.pdf"
    profile.mkdir()
    subprocess.run(
        ["/usr/bin/chromium", "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-background-networking", f"--user-data-dir={profile}",
         "--no-pdf-header-footer", f"--print-to-pdf={printed}", html.as_uri()],
        check=True, capture_output=True, timeout=60,
    )  # fmt: skip
    pages = PdfReader(printed).pages
    assert len(pages) > 1
    for n, page in enumerate(pages, start=1):
        assert "REHEARSAL on a simulated bench" in page.extract_text(), f"printed page {n}"
