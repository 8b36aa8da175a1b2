"""Text is text in the HTML and PDF records: every text a person typed or a file supplied
(operator, serial, notes, reasons, board and checklist text, instrument replies) is shown
literally: markup stays characters, HTML is escaped, and characters that act instead of print
(ANSI escapes, bidirectional overrides) show as visible stand-ins, so they cannot hide or
reorder what follows them.

The record is built from a real log, then its content is given hostile texts where a person or
a file supplies them; the renderers draw whatever content they are given (the seal is not their
business: ``bringup verify`` checks it).
"""

from __future__ import annotations

import copy
from html.parser import HTMLParser

import pytest
from pypdf import PdfReader
from record_samples import Session

from bringup.record.embedding import HTML_BLOCK_OPEN
from bringup.record.export_html import render_html
from bringup.record.export_pdf import render_pdf
from bringup.record.from_log import open_log, record_from_log

MARKUP = "[bold red]Ana[/] [@click=app.quit]quit[/]"
HTML = "<script>alert(1)</script> &amp; <b>x</b>"
ANSI = "\x1b[31mred\x1b[0m"
RLO = "abc\u202edef"
HOSTILE = (MARKUP, HTML, ANSI, RLO)


def _hostile_record(session: Session) -> dict:
    with open_log(session.db) as log:
        record = copy.deepcopy(record_from_log(log, session.session_id))
    content = record["content"]
    text = " | ".join(HOSTILE)
    content["session"]["operators"] = [MARKUP, HTML]
    content["session"]["serial"] = f"SN {HTML}"
    content["board"]["name"] = f"board {MARKUP}"
    stage = content["stages"][0]
    stage["title"] = f"stage {RLO}"
    stage.setdefault("cautions", []).append(f"caution {ANSI}")
    step = stage["steps"][0]
    step["title"] = f"step {HTML}"
    attempt = step["attempts"][-1]
    attempt["notes"] = [f"note {text}"]
    attempt["operator"] = MARKUP
    for verdict in attempt.get("verdicts") or []:
        verdict["reason"] = f"reason {text}"
    step.setdefault("events", []).append(
        {"kind": "note", "at": None, "by": HTML, "text": f"event {text}"}
    )
    content["bench"]["instruments"][0]["idn"] = f"NULLPOINT,{ANSI},{RLO}"
    return record


class _Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.data: list[str] = []

    def handle_starttag(self, tag: str, attrs: list) -> None:
        self.tags.append(tag)

    def handle_data(self, data: str) -> None:
        self.data.append(data)


def test_html_shows_typed_text_literally(session: Session) -> None:
    html = render_html(_hostile_record(session))
    whole = _Text()
    whole.feed(html)
    # the typed <script> is text, not an element: the one script is the record's data block
    assert whole.tags.count("script") == 1
    start = html.index(HTML_BLOCK_OPEN)
    page = html[:start] + html[html.index("</script>", start) + len("</script>") :]
    parsed = _Text()
    parsed.feed(page)  # what the page shows, without the data block
    shown = "".join(parsed.data)
    assert "script" not in parsed.tags
    for literal in (MARKUP, HTML, "[31mred", "abc", "def"):
        assert literal in shown, literal
    # nothing acts: no raw escape or direction override reaches the page
    assert "\x1b" not in html and "\u202e" not in html
    assert "\u241b[31mred\u241b[0m" in shown  # ESC shown as its control picture
    assert "abc\u27e8U+202E\u27e9def" in shown  # the override named, the order kept


def test_pdf_shows_typed_text_literally(session: Session) -> None:
    reader = PdfReader(__import__("io").BytesIO(render_pdf(_hostile_record(session))))
    shown = "\n".join(page.extract_text() for page in reader.pages)
    flat = " ".join(shown.split())
    for literal in ("[bold red]Ana[/]", "[@click=app.quit]quit[/]", "<script>alert(1)</script>",
                    "&amp;", "<b>x</b>"):  # fmt: skip
        assert literal in flat, literal
    assert "\x1b" not in shown and "\u202e" not in shown
    # the core fonts are Latin-1: the stand-ins are spelled out in ASCII
    assert "<U+001B>[31mred<U+001B>[0m" in flat
    assert "abc<U+202E>def" in flat


@pytest.mark.parametrize("render", [render_html, render_pdf])
def test_hostile_text_renders_the_same_bytes_twice(session: Session, render) -> None:
    record = _hostile_record(session)
    assert render(record) == render(copy.deepcopy(record))
