"""Every format verifies: the PDF carries the signed record as an attachment, the HTML in a
data block, and ``bringup verify`` checks that record and that the visible pages are exactly
what it renders, so an edit of a page, of the attachment or of a signature is named."""

from __future__ import annotations

import json
from html.parser import HTMLParser
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pypdf import PdfReader, PdfWriter
from record_samples import Keys, Session

from bringup.cli import main
from bringup.record.embedding import (
    EMBEDDED_NAME,
    HTML_BLOCK_OPEN,
    html_block_record_text,
    html_data_block,
    record_file_bytes,
)
from bringup.store import SessionLog

# The bus level the sample logged (24.07 V): shown on the pages and held in the record.
SHOWN, EDITED = "24.07", "24.97"


def _signed_exports(s: Session, keys: Keys, tmp_path: Path) -> dict[str, Path]:
    for key, role in ((keys.operator, "operator"), (keys.reviewer, "reviewer")):
        args = ["sign", s.session_id, "--db", str(s.db), "--key", str(key), "--role", role]
        assert main(args) == 0
    out = {}
    for fmt in ("json", "html", "pdf"):
        out[fmt] = tmp_path / f"record.{fmt}"
        args = ["export", s.session_id, "--db", str(s.db), "--format", fmt, "--out"]
        assert main([*args, str(out[fmt])]) == 0
    return out


def _verify(path: Path, keys: Keys, capsys: pytest.CaptureFixture[str]) -> tuple[int, list[str]]:
    capsys.readouterr()
    rc = main(
        ["verify", str(path), "--key", f"{keys.operator}.pub", "--key", f"{keys.reviewer}.pub"]
    )
    out = capsys.readouterr().out.splitlines()
    return rc, [line for line in out if line.startswith("CHANGED:")]


@pytest.fixture
def exports(session: Session, keys: Keys, tmp_path: Path) -> dict[str, Path]:
    return _signed_exports(session, keys, tmp_path)


def test_each_format_holds_and_carries_the_json_record(
    exports: dict[str, Path], keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    signed = exports["json"].read_bytes()
    attached = PdfReader(exports["pdf"]).attachments[EMBEDDED_NAME]
    assert attached == [signed]
    html = exports["html"].read_text(encoding="utf-8")
    assert html_block_record_text(html).encode("utf-8") == signed
    for fmt in ("json", "html", "pdf"):
        capsys.readouterr()
        args = ["verify", str(exports[fmt]), "--key", f"{keys.operator}.pub"]
        assert main([*args, "--key", f"{keys.reviewer}.pub"]) == 0, capsys.readouterr().out
        out = capsys.readouterr().out
        assert "holds" in out and "bench: real instruments" in out
        if fmt != "json":
            assert f"every page of the {fmt.upper()} is what its embedded record renders" in out


# --- HTML ----------------------------------------------------------------------------------


def _html_parts(path: Path) -> tuple[str, str, str]:
    """(the page before the data block, the block, the rest)."""
    html = path.read_text(encoding="utf-8")
    at = html.index(HTML_BLOCK_OPEN)
    end = html.index("</script>", at) + len("</script>")
    return html[:at], html[at:end], html[end:]


def test_html_digit_edited_on_the_page_is_named(
    exports: dict[str, Path], keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    page, block, rest = _html_parts(exports["html"])
    assert f"{SHOWN} V" in page
    exports["html"].write_text(page.replace(f"{SHOWN} V", f"{EDITED} V", 1) + block + rest)
    rc, changed = _verify(exports["html"], keys, capsys)
    assert rc == 1
    # the embedded record still holds (seal, signatures): only the page tells the edit
    assert len(changed) == 1 and changed[0].startswith("CHANGED: page: line ")
    assert EDITED in changed[0] and SHOWN in changed[0]


def test_html_digit_edited_in_the_data_block_is_named(
    exports: dict[str, Path], keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    page, block, rest = _html_parts(exports["html"])
    assert f'"value":{SHOWN}' in block
    exports["html"].write_text(page + block.replace(f'"value":{SHOWN}', f'"value":{EDITED}') + rest)
    rc, changed = _verify(exports["html"], keys, capsys)
    assert rc == 1
    text = "\n".join(changed)
    assert "content: " in text and "bus" in text  # the seal names the edited step
    assert "does not verify" in text  # both signatures
    assert "page: line " in text  # the page shows 24.07, the edited record renders 24.97


def test_html_signature_edited_is_named(
    exports: dict[str, Path], keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    page, block, rest = _html_parts(exports["html"])
    record = json.loads(exports["json"].read_text())
    sig = record["signatures"][0]["signature"]
    forged = ("A" if sig[0] != "A" else "B") + sig[1:]
    exports["html"].write_text(page + block.replace(sig, forged) + rest)
    rc, changed = _verify(exports["html"], keys, capsys)
    assert rc == 1
    assert "signature 1 (operator R. Okafor): does not verify" in changed[0]
    # the page says the signature verifies; the edited block's would render "does NOT verify"
    assert len(changed) == 2 and changed[1].startswith("CHANGED: page: line "), changed


class _Scripts(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.scripts: list[dict[str, str | None]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag == "script":
            self.scripts.append(dict(attrs))


def test_typed_script_end_cannot_break_out_of_the_data_block(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    typed = 'probe moved </script><script>alert("x")</script><!-- & \\u003c done'
    with SessionLog.open(session.db, create=False) as log:
        log.record_event(session.session_id, kind="note", operator="R. Okafor", reason=typed)
    exports = _signed_exports(session, keys, tmp_path)
    html = exports["html"].read_text(encoding="utf-8")
    parser = _Scripts()
    parser.feed(html)
    # one script element, a data block of a JSON type (never run), and it holds the note
    assert parser.scripts == [{"type": "application/json", "id": "bringup-record"}]
    notes = [e["text"] for e in json.loads(html_block_record_text(html))["content"]["events"]]
    assert typed in notes
    rc, changed = _verify(exports["html"], keys, capsys)
    assert rc == 0 and changed == []


# --- PDF -----------------------------------------------------------------------------------


def _edit_pdf(path: Path, *, page_text: bool = False, attachment=None) -> None:
    """Edit the PDF as a person with a PDF library would: a digit in a page's drawn text, or
    the embedded record's bytes (``attachment``: old bytes -> new bytes)."""
    writer = PdfWriter(clone_from=PdfReader(path))
    if page_text:
        for page in writer.pages:
            stream = page["/Contents"].get_object()
            data = stream.get_data()
            if f"({SHOWN} V)".encode() in data:
                stream.set_data(data.replace(f"({SHOWN} V)".encode(), f"({EDITED} V)".encode(), 1))
                break
        else:
            raise AssertionError(f"no page draws {SHOWN} V")
    if attachment is not None:
        names = writer._root_object["/Names"]["/EmbeddedFiles"]["/Names"]
        assert names[0] == EMBEDDED_NAME
        stream = names[1].get_object()["/EF"]["/F"].get_object()
        stream.set_data(attachment(stream.get_data()))
    with path.open("wb") as f:
        writer.write(f)


def test_pdf_digit_edited_on_a_page_is_named(
    exports: dict[str, Path], keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    _edit_pdf(exports["pdf"], page_text=True)
    rc, changed = _verify(exports["pdf"], keys, capsys)
    assert rc == 1
    # the attachment is intact (it still verifies): only the page tells the edit
    # the design table (where the edited value is) starts on page 2, after the summary page
    assert len(changed) == 1 and changed[0].startswith("CHANGED: page 2: text line ")
    assert f"{EDITED} V" in changed[0] and f"{SHOWN} V" in changed[0]


def test_pdf_attachment_edited_is_named(
    exports: dict[str, Path], keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    old, new = f'"value":{SHOWN}'.encode(), f'"value":{EDITED}'.encode()
    _edit_pdf(exports["pdf"], attachment=lambda data: data.replace(old, new))
    rc, changed = _verify(exports["pdf"], keys, capsys)
    assert rc == 1
    text = "\n".join(changed)
    assert "content: " in text and "bus" in text and "does not verify" in text
    assert "page 1: text line" in text  # the page shows 24.07, the edited record renders 24.97


def test_pdf_signature_edited_is_named(
    exports: dict[str, Path], keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    sig = json.loads(exports["json"].read_text())["signatures"][1]["signature"]
    forged = ("A" if sig[0] != "A" else "B") + sig[1:]
    _edit_pdf(exports["pdf"], attachment=lambda data: data.replace(sig.encode(), forged.encode()))
    rc, changed = _verify(exports["pdf"], keys, capsys)
    assert rc == 1
    assert any("signature 2 (reviewer M. Lindqvist): does not verify" in c for c in changed)
    assert not any("content:" in c for c in changed)


def test_pdf_and_html_without_a_record_are_refused_in_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from fpdf import FPDF

    plain = FPDF()
    plain.add_page()
    (tmp_path / "plain.pdf").write_bytes(bytes(plain.output()))
    (tmp_path / "broken.pdf").write_bytes(b"%PDF-1.7\n1 0 obj << /Type /Catalog >>\ntrailer")
    (tmp_path / "page.html").write_text("<!DOCTYPE html><html><body><p>24.07 V</p></body></html>")
    expected = {
        "plain.pdf": "a PDF without an embedded bringup record (bringup-record.json)",
        "broken.pdf": "a PDF that cannot be read",
        "page.html": "an HTML page without one bringup record data block",
    }
    for name, words in expected.items():
        capsys.readouterr()
        assert main(["verify", str(tmp_path / name)]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and words in err[0] and name in err[0], err


@given(st.lists(st.text(alphabet=st.sampled_from('<>&\\u"/sc \u202e\u2066\u061c\x1b')), max_size=6))
@settings(max_examples=200, deadline=None)
def test_data_block_gives_back_the_record_file_text(texts: list[str]) -> None:
    """Whatever a person typed (backslashes before "u003c" included), the data block's text
    unescapes to the record file's bytes, holds no ``<`` (so no ``</script>``) and no
    character that reorders text."""
    record = {"schema": "bringup-record/2", "content": {"notes": texts}}
    block = html_data_block(record)
    inner = block[len(HTML_BLOCK_OPEN) : -len("</script>")]
    assert "<" not in inner and ">" not in inner and "&" not in inner
    assert not set(inner) & {"\u202e", "\u2066", "\u061c"}
    html = f"<!DOCTYPE html><p>x</p>{block}</body>"
    assert html_block_record_text(html).encode("utf-8") == record_file_bytes(record)
