"""The HTML and PDF records: self-contained, summary first, identity and hash on every page."""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest
from pypdf import PdfReader
from record_samples import Keys, Session

from bringup.cli import main

CHROMIUM = Path("/usr/bin/chromium")


def _export(s: Session, fmt: str, out: Path) -> Path:
    assert (
        main(["export", s.session_id, "--db", str(s.db), "--format", fmt, "--out", str(out)]) == 0
    )
    return out


def _sign_both(s: Session, keys: Keys) -> None:
    for key, role in ((keys.operator, "operator"), (keys.reviewer, "reviewer")):
        assert (
            main(["sign", s.session_id, "--db", str(s.db), "--key", str(key), "--role", role]) == 0
        )


class _Outline(HTMLParser):
    """Collects what a self-contained page must not have and the order of its sections."""

    def __init__(self) -> None:
        super().__init__()
        self.references: list[str] = []
        self.tags: set[str] = set()
        self.sections: list[str] = []
        self.text: list[str] = []
        self.script_types: list[str | None] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag == "script":  # only a data block counts; anything else would be run
            self.script_types.append(dict(attrs).get("type"))
            return
        self.tags.add(tag)
        for name, value in attrs:
            if name in ("href", "src", "xlink:href", "srcset", "action", "data") and value:
                self.references.append(value)
        if tag == "section":
            self.sections.append(dict(attrs).get("id") or dict(attrs).get("class") or "")

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def test_html_is_self_contained_with_the_summary_first(
    session: Session, keys: Keys, tmp_path: Path
) -> None:
    _sign_both(session, keys)
    html = _export(session, "html", tmp_path / "r.html").read_text()
    assert _export(session, "html", tmp_path / "again.html").read_text() == html  # reproducible
    outline = _Outline()
    outline.feed(html)
    assert outline.references == []  # no links, images or scripts to fetch
    # the one script element is the signed record as data (a JSON type is never run)
    assert outline.script_types == ["application/json"]
    assert not outline.tags & {"script", "link", "img", "iframe", "object", "embed"}
    # The only URL is the SVG namespace name, which is never fetched.
    urls = set(re.findall(r"https?://[^\s\"'<>)]+", html))
    assert urls == {"http://www.w3.org/2000/svg"}
    assert "@import" not in html and "url(" not in html
    assert outline.sections[:2] == ["summary", "cautions"]
    text = " ".join(" ".join(outline.text).split())
    assert text.index("Summary") < text.index("Stage: Power rails")
    # Outcomes are spelled out, not told by colour alone.
    for words in ("[W] failed, waived", "[S] skipped", "[OK] passed", "fail within guard band"):
        assert words in text
    assert "DHS24-0117" in text and "Lindqvist" in text
    record = json.loads(_export(session, "json", tmp_path / "r.json").read_text())
    assert record["seal"]["content_sha256"] in text
    # A plot per logged waveform (the failed first gate try included), and a close view of
    # the first edge where crossings were marked (the gate retake and the switch node).
    assert html.count("drawn as the min/max of each pixel column") == 5
    assert html.count("first edge (close view)</title>") == 2
    assert html.count("<svg") == 7


def test_pdf_carries_serial_verdicts_and_hash_on_every_page(
    session: Session, keys: Keys, tmp_path: Path
) -> None:
    _sign_both(session, keys)
    pdf_path = _export(session, "pdf", tmp_path / "r.pdf")
    digest = json.loads(_export(session, "json", tmp_path / "r.json").read_text())["seal"][
        "content_sha256"
    ]
    reader = PdfReader(pdf_path)
    pages = [p.extract_text() for p in reader.pages]
    assert len(pages) >= 5  # summary, then a page per stage
    for n, text in enumerate(pages, start=1):
        assert digest in text, f"page {n} lacks the content hash"
        assert "DHS24-0117" in text, f"page {n} lacks the serial"
        assert f"page {n} of {len(pages)}" in text
    everything = "\n".join(pages)
    for words in ("ACCEPTED WITH EXCEPTIONS", "FAIL", "pass", "failed, waived", "skipped"):
        assert words in everything
    assert "M. Lindqvist" in everything and "reviewer" in everything
    # Reproducible: the same session gives the same bytes (fixed creation date, no random id).
    assert _export(session, "pdf", tmp_path / "again.pdf").read_bytes() == pdf_path.read_bytes()
    assert reader.metadata["/CreationDate"].startswith("D:20")


@pytest.mark.skipif(not CHROMIUM.exists(), reason="no /usr/bin/chromium on this machine")
def test_html_renders_and_prints_in_headless_chromium(session: Session, tmp_path: Path) -> None:
    html = _export(session, "html", tmp_path / "r.html")
    profile = tmp_path / "chromium-profile"
    profile.mkdir()
    base = [
        str(CHROMIUM), "--headless", "--no-sandbox", "--disable-gpu",
        "--disable-background-networking", "--no-first-run", f"--user-data-dir={profile}",
    ]  # fmt: skip
    shot, printed = tmp_path / "shot.png", tmp_path / "printed.pdf"
    # One launch takes the screenshot and prints the page to PDF.
    subprocess.run(
        [*base, "--window-size=1000,1400", f"--screenshot={shot}", "--no-pdf-header-footer",
         f"--print-to-pdf={printed}", html.as_uri()],
        check=True, capture_output=True, timeout=60,
    )  # fmt: skip
    data = shot.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")
    assert (width, height) == (1000, 1400)
    try:
        from PIL import Image
    except ImportError:
        pass
    else:
        with Image.open(shot) as im:
            colours = im.convert("RGB").getcolors(maxcolors=1 << 20)
        assert colours is not None and len(colours) > 50  # text and tables, not a blank page
    printed_text = "\n".join(p.extract_text() for p in PdfReader(printed).pages)
    assert "DHS24-0117" in printed_text and "Summary" in printed_text
    assert "Stage: Thermal soak" in printed_text
    shutil.rmtree(profile, ignore_errors=True)


def test_exports_are_identical_across_processes(session: Session, tmp_path: Path) -> None:
    """A fresh interpreter with another hash seed writes the same JSON and PDF bytes."""
    script = (
        "import sys\n"
        "from bringup.cli import main\n"
        "for fmt in ('json', 'pdf'):\n"
        "    assert main(['export', sys.argv[1], '--db', sys.argv[2], '--format', fmt,\n"
        "                 '--out', sys.argv[3] + '.' + fmt]) == 0\n"
    )
    there = tmp_path / "there"
    env = {**os.environ, "PYTHONHASHSEED": "12345"}
    subprocess.run(
        [sys.executable, "-c", script, session.session_id, str(session.db), str(there)],
        check=True, capture_output=True, env=env, timeout=120,
    )  # fmt: skip
    for fmt in ("json", "pdf"):
        here = _export(session, fmt, tmp_path / f"here.{fmt}")
        assert here.read_bytes() == Path(f"{there}.{fmt}").read_bytes(), fmt


def test_nested_settings_are_shown_with_their_values(session: Session) -> None:
    """The runner logs settings as nested tables (supply, pwm, scope channels); each leaf is
    shown under its dotted name, never as "no value" (what a flat metric reader made of them)."""
    from bringup.record.export_html import render_html
    from bringup.record.from_log import open_log, record_from_log

    with open_log(session.db) as log:
        record = record_from_log(log, session.session_id)
    attempt = record["content"]["stages"][0]["steps"][0]["attempts"][-1]
    attempt["settings"] = {
        "supply": {"ovp_v": 27.400000000000002, "ramp_v": [6, 12]},
        "scope": {"channels": [{"net": "vgs", "range_v": 30}], "trigger": {"net": "switch"}},
        "pwm": {"enabled": False},
    }
    html = render_html(record)
    for name, value in (("supply.ovp_v", "27.4"), ("supply.ramp_v", "6, 12"),
                        ("scope.trigger.net", "switch"), ("pwm.enabled", "off")):  # fmt: skip
        assert f"<td>{name}</td><td>{value}</td>" in html
    # the scope's channels are told once, in the table of what was probed where
    probed = html.split("What was probed where")[1].split("</table>")[0]
    assert "<td>vgs</td><td>" in probed and "30 V" in probed
    assert "no value" not in html.split("Settings")[1].split("</details>")[0]
