"""The PDF record (fpdf2): the blocks of ``bringup.record.document``, paginated.

The same blocks as the HTML record, in the same order; the one-minute summary has page 1 to
itself, the rest flows on (a heading is kept with what follows it). Every page
carries the record's identity (serial, session) in its header and the full SHA-256 of the
canonical content with "page N of M" in its footer, so a single printed page can be matched to
its record. The signed record (its canonical JSON file) is embedded as a PDF attachment
(``embedding.EMBEDDED_NAME``), which ``bringup verify`` checks and renders again to compare
with the pages. The file is reproducible: its creation date is the session's last entry (not the
export time) and fpdf2 derives the document ID from the content and that date.

The built-in PDF core fonts cover Latin-1 only: other characters are spelled out, and the
visible stand-ins for characters that act instead of print (``bringup.literal_text``) are
written in ASCII (``<U+001B>``, ``<U+202E>``), so what a person typed is shown literally.
"""

from __future__ import annotations

import io
import logging
from datetime import UTC, datetime
from typing import Any

from bringup.literal_text import visible
from bringup.record.document import (
    Aside,
    Block,
    Bullets,
    Document,
    Figure,
    Heading,
    Paragraph,
    Section,
    Table,
    build_document,
)
from bringup.record.embedding import EMBEDDED_NAME, record_file_bytes
from bringup.record.svg import plot_svg
from bringup.record.view import STATUS_WORDS

__all__ = ["render_pdf"]

_SPELLED = {
    "\u03a9": "ohm",
    "\u2126": "ohm",
    "\u2013": "-",
    "\u2014": "-",
    "\u2026": "...",
    "\u2264": "<=",
    "\u2265": ">=",
    "\u2212": "-",
    "\u2018": "'",
    "\u2019": "'",
    "\u201c": '"',
    "\u201d": '"',
    "\u03c4": "tau",
    "\u0394": "delta ",
}


def _ascii_stand_in(char: str) -> str:
    """A control picture (U+2400..U+2421) or an angle-bracketed code point, in ASCII."""
    code = ord(char)
    if 0x2400 <= code <= 0x241F:
        return f"<U+{code - 0x2400:04X}>"
    if code == 0x2421:
        return "<U+007F>"
    return {"\u27e8": "<", "\u27e9": ">"}.get(char, char)


def _latin1(text: Any, *, multiline: bool = True) -> str:
    """``text`` as the core fonts can show it literally: acting characters as ASCII stand-ins,
    known symbols spelled out, any other character outside Latin-1 as '?'."""
    s = visible("" if text is None else str(text), multiline=multiline)
    s = "".join(_ascii_stand_in(c) if "\u2400" <= c <= "\u2421" or c in "\u27e8\u27e9" else c
                for c in s)  # fmt: skip
    for a, b in _SPELLED.items():
        s = s.replace(a, b)
    return s.encode("latin-1", errors="replace").decode("latin-1")


def _date_of(doc: Document) -> datetime:
    """The session's last entry time (or its start) as the PDF's fixed creation date."""
    for stamp in doc.times_utc:
        try:
            text = stamp.replace("Z", "+00:00")
            return datetime.fromisoformat(text).astimezone(UTC).replace(microsecond=0)
        except ValueError:
            continue
    return datetime(2000, 1, 1, tzinfo=UTC)


def _make_document(identity: str, digest: str, mark: str | None = None) -> Any:
    from fpdf import FPDF

    class _Record(FPDF):
        def header(self) -> None:
            self.set_font("Helvetica", "", 8)
            self.set_text_color(60, 60, 60)
            self.cell(0, 5, _latin1(identity, multiline=False), new_x="LMARGIN", new_y="NEXT")
            if mark is not None:  # a rehearsal says so on every page, top and bottom
                self.set_font("Helvetica", "B", 9)
                self.set_text_color(150, 40, 0)
                self.cell(0, 5, _latin1(mark, multiline=False), new_x="LMARGIN", new_y="NEXT")
                self.set_text_color(60, 60, 60)
            self.set_draw_color(150, 150, 150)
            self.line(self.l_margin, self.get_y(), self.w - self.r_margin, self.get_y())
            self.ln(2)
            self.set_text_color(0, 0, 0)

        def footer(self) -> None:
            self.set_y(-12 if mark is None else -16)
            self.set_font("Helvetica", "", 7)
            self.set_text_color(60, 60, 60)
            if mark is not None:
                self.cell(0, 4, _latin1(mark, multiline=False), new_x="LMARGIN", new_y="NEXT")
            self.cell(0, 4, f"content SHA-256 {digest}", new_x="LMARGIN", new_y="NEXT")
            self.cell(0, 4, f"page {self.page_no()} of {{nb}}", align="R")
            self.set_text_color(0, 0, 0)

    pdf = _Record(format="A4")
    pdf.set_auto_page_break(True, margin=16 if mark is None else 20)
    pdf.alias_nb_pages()
    return pdf


_HEADING_SIZE = {1: 16, 2: 12, 3: 10, 4: 9}


def _heading(pdf: Any, h: Heading) -> None:
    size = _HEADING_SIZE.get(h.level, 9)
    if h.level >= 3 and pdf.get_y() + 30 > pdf.h - pdf.b_margin:
        pdf.add_page()  # a step's heading starts its page rather than ending the one before
    text = h.text
    if h.status is not None:
        text += f": {STATUS_WORDS.get(h.status, h.status)}"
    pdf.set_font("Helvetica", "B", size)
    pdf.multi_cell(0, size * 0.5, _latin1(text), new_x="LMARGIN", new_y="NEXT")
    pdf.ln(1)
    pdf.set_font("Helvetica", "", 9)


def _para(pdf: Any, text: str, style: str = "") -> None:
    pdf.set_font("Helvetica", style, 9)
    pdf.multi_cell(0, 4.5, _latin1(text), new_x="LMARGIN", new_y="NEXT")
    pdf.set_font("Helvetica", "", 9)


def _paragraph(pdf: Any, p: Paragraph) -> None:
    if p.kind == "caution":
        _para(pdf, f"CAUTION ({p.lead}): {p.text}" if p.lead else f"CAUTION: {p.text}")
    elif p.kind == "flag":  # a reviewer must not miss it: bold, in the rehearsal mark's colour
        pdf.set_text_color(150, 40, 0)
        _para(pdf, f"FLAG: {p.text}", "B")
        pdf.set_text_color(0, 0, 0)
    else:
        _para(pdf, p.text, "B" if p.kind in ("outcome", "strong", "rehearsal") else "")


def _table(pdf: Any, table: Table) -> None:
    if not table.rows:
        if table.empty:
            _para(pdf, table.empty)
        return
    if table.fold is not None:
        if pdf.get_y() + 20 > pdf.h - pdf.b_margin:
            pdf.add_page()  # a table's title stays with its first rows
        _para(pdf, table.fold, "B")
    pdf.set_font("Helvetica", "", 8)
    with pdf.table(
        col_widths=table.widths,
        text_align="LEFT",
        line_height=4,
        first_row_as_headings=table.head is not None,
    ) as grid:
        for values in ([table.head] if table.head is not None else []) + list(table.rows):
            row = grid.row()
            for v in values:
                row.cell(_latin1(v))
    pdf.ln(2)
    pdf.set_font("Helvetica", "", 9)


def _figure(pdf: Any, figure: Figure) -> None:
    t = figure.trace
    svg = plot_svg(t.t, t.y, title=t.name, unit=t.unit, markers=t.markers, overlay=t.model)
    # fpdf2 would print the <title> as text; the caption below says what the plot is
    svg = svg.replace(svg[svg.index("<title>") : svg.index("</title>") + 8], "")
    svg = _latin1(svg)
    height = 190 * 220 / 640
    if pdf.get_y() + height > pdf.h - pdf.b_margin - 2:
        pdf.add_page()
    y = pdf.get_y()
    logging.getLogger("fpdf.svg").setLevel(logging.ERROR)
    pdf.image(io.BytesIO(svg.encode("utf-8")), x=pdf.l_margin, y=y, w=190)
    pdf.set_y(y + height + 1)
    _para(pdf, figure.caption)


def _block(pdf: Any, block: Block) -> None:
    if isinstance(block, Heading):
        _heading(pdf, block)
    elif isinstance(block, Paragraph):
        _paragraph(pdf, block)
    elif isinstance(block, Bullets):
        _para(pdf, "\n".join(f"- {i}" for i in block.items) if block.items else block.empty)
    elif isinstance(block, Table):
        _table(pdf, block)
    elif isinstance(block, Figure):
        _figure(pdf, block)
    elif isinstance(block, Aside):
        for inner in block.blocks:
            _block(pdf, inner)
    else:
        raise TypeError(f"no PDF for {type(block).__name__}")


#: a section's heading needs this much room below it (mm) on its page, or it moves to the
#: next page: a stage's (its cautions and its first step's heading and results) more
_KEEP_WITH_NEXT = 40
_KEEP_STAGE_WITH_NEXT = 100


def _section(pdf: Any, section: Section) -> None:
    # The summary stands alone on page 1; the other sections flow on, so no page is left
    # holding a stray row, and a heading never ends a page.
    room = _KEEP_STAGE_WITH_NEXT if section.stage else _KEEP_WITH_NEXT
    if section.starts_page or pdf.get_y() + room > pdf.h - pdf.b_margin:
        pdf.add_page()
    _heading(pdf, Heading(section.title, 2))
    for block in section.blocks:
        _block(pdf, block)


def render_pdf(record: dict) -> bytes:
    """The PDF bytes of an exported record (``{"schema", "content", "seal", "signatures"}``)."""
    doc = build_document(record)
    pdf = _make_document(doc.running_head, doc.digest, doc.rehearsal)
    date = _date_of(doc)
    pdf.set_creation_date(date)
    # the record itself, dated like the PDF (not the export time) so the bytes reproduce
    pdf.embed_file(
        bytes=record_file_bytes(record),
        basename=EMBEDDED_NAME,
        mime_type="application/json",
        creation_date=date,
        modification_date=date,
        desc="The signed bring-up record these pages show; check with: bringup verify",
        compress=True,
    )
    pdf.set_title(_latin1(f"Bring-up record {doc.serial}"))
    pdf.set_author(_latin1(", ".join(doc.operators)))
    pdf.set_creator("bringup")
    pdf.add_page()
    _heading(pdf, Heading(doc.title, 1))
    for section in doc.sections:
        _section(pdf, section)
    _para(pdf, doc.closing)
    return bytes(pdf.output())
