"""The HTML record: one self-contained, printable file (inline CSS and SVG, nothing to run).

The signed record itself travels in the file as a JSON data block (``embedding``), which
``bringup verify`` checks and renders again to compare with the page.

It lays out the blocks of ``bringup.record.document`` (the same ones the PDF record draws), in
their order: summary, cautions, bench, design against measurement, the stages, the record's
identity. Every text goes through ``_e``: HTML-escaped and with the characters that act instead
of print (escapes, direction overrides) shown as visible stand-ins, so what a person typed or a
file supplied is shown literally.
"""

from __future__ import annotations

from html import escape
from typing import Any

from bringup.literal_text import visible
from bringup.record.document import (
    Aside,
    Block,
    Bullets,
    Figure,
    Heading,
    Paragraph,
    Section,
    Table,
    build_document,
)
from bringup.record.embedding import html_data_block
from bringup.record.svg import plot_svg
from bringup.record.view import STATUS_WORDS

__all__ = ["render_html"]

_CSS = """
body{font-family:Georgia,'DejaVu Serif',serif;color:#1d1d1d;max-width:60rem;margin:1.5rem auto;
padding:0 1rem;line-height:1.35}
h1{font-size:1.5rem;border-bottom:3px double #444;padding-bottom:.3rem}
h2{font-size:1.2rem;margin-top:2rem;border-bottom:1px solid #999}
h3{font-size:1rem;margin:1.2rem 0 .4rem}
table{border-collapse:collapse;width:100%;margin:.4rem 0 .8rem;font-size:.9rem}
th,td{border:1px solid #bbb;padding:.2rem .4rem;text-align:left;vertical-align:top}
th{background:#efece4}
.mono{font-family:'DejaVu Sans Mono',monospace;font-size:.82rem;word-break:break-all}
.tag{font-weight:bold;padding:0 .3rem;border:1px solid #555;border-radius:3px}
.tag-accepted{background:#dcefe0}.tag-rejected{background:#f6d4cf}
.tag-waived,.tag-skipped{background:#f5e9c8}.tag-unfinished,.tag-not-started{background:#e4e4e4}
.rehearsal{font-weight:bold;background:#fde3d0;border:2px dashed #963;padding:.3rem .6rem}
.flag{font-weight:bold;color:#963;border-left:5px solid #963;padding:.2rem .6rem}
.overall{font-size:1.1rem;font-weight:bold;border:2px solid #333;padding:.4rem .6rem}
.caution{border-left:5px solid #8a5a00;background:#fbf3e2;padding:.3rem .6rem;margin:.3rem 0}
figure{margin:.5rem 0;break-inside:avoid}
figcaption{font-size:.8rem;color:#444}
.earlier{border-left:3px dotted #777;padding-left:.6rem;margin:.6rem 0}
h4{font-size:.95rem;margin:.6rem 0 .3rem}
footer{margin-top:2rem;font-size:.8rem;color:#333;border-top:1px solid #999}
@media print{body{max-width:none;margin:0}section.stage{break-before:page}
a{color:inherit;text-decoration:none}
.rehearsal,.flag,.overall{-webkit-print-color-adjust:exact;print-color-adjust:exact}
#rehearsal{position:fixed;top:0;left:0;right:0;margin:0;background:#fde3d0}
body.rehearsal-record{padding-top:2.6rem}}
"""


def _e(value: Any) -> str:
    """Text as HTML shows it literally: escaped, acting characters made visible."""
    return escape(visible("" if value is None else str(value)))


def _table(table: Table) -> str:
    if not table.rows:
        return f"<p>{_e(table.empty)}</p>" if table.empty else ""
    if table.head is None:  # names and values, the name as the row's header
        body = "".join(
            f'<tr><th scope="row">{_e(a)}</th><td>{_e(b)}</td></tr>' for a, b in table.rows
        )
        html = f"<table>{body}</table>"
    else:
        out = ["<table><thead><tr>", *(f"<th>{_e(h)}</th>" for h in table.head)]
        out.append("</tr></thead><tbody>")
        for row in table.rows:
            out.append("<tr>" + "".join(f"<td>{_e(c)}</td>" for c in row) + "</tr>")
        out.append("</tbody></table>")
        html = "".join(out)
    if table.fold is None:
        return html
    opened = "" if table.folded else " open"
    return f"<details{opened}><summary>{_e(table.fold)}</summary>{html}</details>"


def _tag(status: str) -> str:
    return f'<span class="tag tag-{_e(status)}">{_e(STATUS_WORDS.get(status, status))}</span>'


def _heading(h: Heading) -> str:
    tag = f" {_tag(h.status)}" if h.status is not None else ""
    return f"<h{h.level}>{_e(h.text)}{tag}</h{h.level}>"


def _paragraph(p: Paragraph) -> str:
    if p.kind == "caution":
        lead = f"<b>{_e(p.lead)}:</b> " if p.lead else ""
        return f'<p class="caution">{lead}{_e(p.text)}</p>'
    if p.kind == "rehearsal":
        return f'<p class="rehearsal">{_e(p.text)}</p>'
    if p.kind == "outcome":
        return f'<p class="overall">{_e(p.text)}</p>'
    if p.kind == "flag":
        return f'<p class="flag"><b>FLAG:</b> {_e(p.text)}</p>'
    if p.kind == "strong":
        return f"<p><b>{_e(p.text)}</b></p>"
    return f"<p>{_e(p.text)}</p>"


def _figure(f: Figure) -> str:
    t = f.trace
    svg = plot_svg(t.t, t.y, title=t.name, unit=t.unit, markers=t.markers, overlay=t.model)
    return f"<figure>{svg}<figcaption>{_e(f.caption)}</figcaption></figure>"


def _block(block: Block) -> str:
    if isinstance(block, Heading):
        return _heading(block)
    if isinstance(block, Paragraph):
        return _paragraph(block)
    if isinstance(block, Bullets):
        if not block.items:
            return f"<p>{_e(block.empty)}</p>"
        return "<ul>" + "".join(f"<li>{_e(i)}</li>" for i in block.items) + "</ul>"
    if isinstance(block, Table):
        return _table(block)
    if isinstance(block, Figure):
        return _figure(block)
    if isinstance(block, Aside):
        return '<div class="earlier">' + "".join(_block(b) for b in block.blocks) + "</div>"
    raise TypeError(f"no HTML for {type(block).__name__}")


def _section(section: Section) -> str:
    where = f'class="stage" id="{_e(section.key)}"' if section.stage else f'id="{_e(section.key)}"'
    body = "".join(_block(b) for b in section.blocks)
    return f"<section {where}><h2>{_e(section.title)}</h2>{body}</section>"


def render_html(record: dict) -> str:
    """The HTML text of an exported record (``{"schema", "content", "seal", "signatures"}``)."""
    doc = build_document(record)
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{_e(doc.title)}</title>",
        f"<style>{_CSS}</style></head>",
        # a rehearsal's banner is fixed at the top of the screen and of every printed page
        '<body class="rehearsal-record">' if doc.rehearsal else "<body>",
        *(
            [f'<p class="rehearsal" id="rehearsal">{_e(doc.rehearsal)}</p>']
            if doc.rehearsal
            else []
        ),
        f"<h1>{_e(doc.title)}</h1>",
        *(_section(s) for s in doc.sections),
        f"<footer>{_e(doc.closing)}</footer>",
        # the signed record the page was rendered from: data, never run
        html_data_block(record),
        "</body></html>",
    ]
    return "\n".join(parts) + "\n"
