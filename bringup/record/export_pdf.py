"""The PDF record (fpdf2): the HTML record's content, paginated.

Every page carries the record's identity (serial, session) in its header and the full SHA-256
of the canonical content with "page N of M" in its footer, so a single printed page can be
matched to its record. The file is reproducible: its creation date is the session's last
entry (not the export time) and fpdf2 derives the document ID from the content and that date.
The built-in PDF core fonts cover Latin-1 only; other characters are spelled out.
"""

from __future__ import annotations

import io
import logging
from datetime import UTC, datetime
from typing import Any

from bringup.record.svg import plot_svg
from bringup.record.view import (
    GENERAL_CAUTIONS,
    OUTCOME_WORDS,
    OVERALL_WORDS,
    STATUS_WORDS,
    Trace,
    checklist_label,
    comparison_rows,
    decode_trace,
    design_rows,
    fmt_time,
    fmt_value,
    probe_text,
    soak_trace,
    step_cautions,
    zoom_trace,
)

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


def _latin1(text: Any) -> str:
    """``text`` in the core fonts' Latin-1 range: known symbols spelled out, others as '?'."""
    s = "" if text is None else str(text)
    for a, b in _SPELLED.items():
        s = s.replace(a, b)
    return s.encode("latin-1", errors="replace").decode("latin-1")


def _date_of(content: dict) -> datetime:
    """The session's last entry time (or its start) as the PDF's fixed creation date."""
    session = content.get("session", {})
    for key in ("ended", "started"):
        stamp = session.get(key)
        if isinstance(stamp, dict) and stamp.get("utc"):
            try:
                text = str(stamp["utc"]).replace("Z", "+00:00")
                return datetime.fromisoformat(text).astimezone(UTC).replace(microsecond=0)
            except ValueError:
                continue
    return datetime(2000, 1, 1, tzinfo=UTC)


def _make_document(identity: str, digest: str) -> Any:
    from fpdf import FPDF

    class _Record(FPDF):
        def header(self) -> None:
            self.set_font("Helvetica", "", 8)
            self.set_text_color(60, 60, 60)
            self.cell(0, 5, _latin1(identity), new_x="LMARGIN", new_y="NEXT")
            self.set_draw_color(150, 150, 150)
            self.line(self.l_margin, self.get_y(), self.w - self.r_margin, self.get_y())
            self.ln(2)
            self.set_text_color(0, 0, 0)

        def footer(self) -> None:
            self.set_y(-12)
            self.set_font("Helvetica", "", 7)
            self.set_text_color(60, 60, 60)
            self.cell(0, 4, f"content SHA-256 {digest}", new_x="LMARGIN", new_y="NEXT")
            self.cell(0, 4, f"page {self.page_no()} of {{nb}}", align="R")
            self.set_text_color(0, 0, 0)

    pdf = _Record(format="A4")
    pdf.set_auto_page_break(True, margin=16)
    pdf.alias_nb_pages()
    return pdf


def _heading(pdf: Any, text: str, size: int = 13) -> None:
    pdf.set_font("Helvetica", "B", size)
    pdf.multi_cell(0, size * 0.5, _latin1(text), new_x="LMARGIN", new_y="NEXT")
    pdf.ln(1)
    pdf.set_font("Helvetica", "", 9)


def _para(pdf: Any, text: str, style: str = "") -> None:
    pdf.set_font("Helvetica", style, 9)
    pdf.multi_cell(0, 4.5, _latin1(text), new_x="LMARGIN", new_y="NEXT")
    pdf.set_font("Helvetica", "", 9)


def _table(pdf: Any, head: list[str], rows: list[list[Any]], widths: tuple[int, ...]) -> None:
    if not rows:
        return
    pdf.set_font("Helvetica", "", 8)
    with pdf.table(
        col_widths=widths, text_align="LEFT", line_height=4, first_row_as_headings=True
    ) as table:
        row = table.row()
        for h in head:
            row.cell(_latin1(h))
        for values in rows:
            row = table.row()
            for v in values:
                row.cell(_latin1(v))
    pdf.ln(2)
    pdf.set_font("Helvetica", "", 9)


def _plot(pdf: Any, wave: dict) -> None:
    trace = decode_trace(wave)
    if trace is None:
        _para(pdf, f"Waveform {wave.get('name')}: cannot be decoded.")
        return
    _draw(pdf, trace, f"{wave.get('name')}: {trace.t.size} samples, min/max per column.")
    zoom = zoom_trace(trace)
    if zoom is not None:
        _draw(pdf, zoom, f"{wave.get('name')}: the first edge, {zoom.t.size} samples.")


def _draw(pdf: Any, trace: Trace, caption: str) -> None:
    svg = plot_svg(trace.t, trace.y, title=trace.name, unit=trace.unit, markers=trace.markers,
                   overlay=trace.model)  # fmt: skip
    svg = svg.replace(svg[svg.index("<title>") : svg.index("</title>") + 8], "")
    svg = _latin1(svg)
    height = 190 * 220 / 640
    if pdf.get_y() + height > pdf.h - 18:
        pdf.add_page()
    y = pdf.get_y()
    logging.getLogger("fpdf.svg").setLevel(logging.ERROR)
    pdf.image(io.BytesIO(svg.encode("utf-8")), x=pdf.l_margin, y=y, w=190)
    pdf.set_y(y + height + 1)
    _para(pdf, caption)


def render_pdf(record: dict) -> bytes:
    """The PDF bytes of an exported record (``{"schema", "content", "seal", "signatures"}``)."""
    content = record["content"]
    digest = record.get("seal", {}).get("content_sha256", "")
    session, board = content.get("session", {}), content.get("board", {})
    summary, checklist = content.get("summary", {}), content.get("checklist", {})
    identity = (
        f"Bring-up record  |  serial {session.get('serial', '-')}  |  "
        f"{board.get('name', '-')} rev {board.get('revision', '-')}  |  "
        f"session {session.get('id', '-')}"
    )
    pdf = _make_document(identity, digest)
    pdf.set_creation_date(_date_of(content))
    pdf.set_title(_latin1(f"Bring-up record {session.get('serial', '')}"))
    pdf.set_author(_latin1(", ".join(session.get("operators") or [])))
    pdf.set_creator("bringup")
    pdf.add_page()

    _heading(pdf, f"Bring-up record {session.get('serial', '')}", 16)
    overall = summary.get("overall", "incomplete")
    _para(pdf, f"Outcome: {OVERALL_WORDS.get(overall, overall)}", "B")
    counts = summary.get("counts", {})
    rows = [
        ["Board", f"{board.get('name', '-')} rev {board.get('revision', '-')}"],
        ["Serial number", session.get("serial", "-")],
        ["Checklist", checklist_label(checklist)],
        ["Operators", ", ".join(session.get("operators") or []) or "-"],
        ["Started", fmt_time(session.get("started"))],
        ["Last entry", fmt_time(session.get("ended"))],
        ["Steps", ", ".join(f"{v} {k}" for k, v in sorted(counts.items())) or "-"],
        ["Content SHA-256", digest],
        ["Log chain head", (content.get("log") or {}).get("chain_head") or "-"],
    ]
    _table(pdf, ["Item", "Value"], rows, (45, 145))
    _heading(pdf, "Open items", 11)
    items = summary.get("open_items") or []
    _para(pdf, "\n".join(f"- {i}" for i in items) if items else "None.")
    exceptions = summary.get("exceptions") or []
    if exceptions:
        _heading(pdf, "Waivers and skips", 11)
        _para(pdf, "\n".join(f"- {x}" for x in exceptions))
    _heading(pdf, "Sign-off", 11)
    sigs = record.get("signatures") or []
    if sigs:
        _table(
            pdf,
            ["Role", "Name", "Signed (UTC)", "Key fingerprint"],
            [
                [s.get("role"), s.get("name"), s.get("signed_at"), s.get("key_fingerprint")]
                for s in sigs
            ],
            (20, 35, 40, 95),
        )
    else:
        _para(pdf, "Not signed yet.")

    _heading(pdf, "Cautions", 11)
    for c in GENERAL_CAUTIONS:
        _para(pdf, f"CAUTION: {c}")
    for stage in content.get("stages", []):
        for where, c in step_cautions(stage):
            _para(pdf, f"CAUTION ({where}): {c}")

    _heading(pdf, "Bench", 11)
    bench_rows = []
    for inst in (content.get("bench") or {}).get("instruments", []):
        probes = "; ".join(probe_text(c) for c in inst.get("channels") or [])
        bench_rows.append(
            [
                inst.get("id"),
                inst.get("idn") or "-",
                inst.get("profile") or "-",
                inst.get("calibration_due") or "not given",
                probes or "-",
            ]
        )
    _table(
        pdf, ["Role", "*IDN?", "Profile", "Cal. due", "Probes"], bench_rows, (20, 65, 30, 25, 50)
    )

    _heading(pdf, "Design against measurement", 11)
    comp = comparison_rows(content)
    _table(
        pdf,
        ["Step", "Quantity", "Design", "Measured", "Deviation", "Note"],
        [
            [r["where"], r["quantity"], r["predicted"], r["measured"], r["deviation"], r["note"]]
            for r in comp
        ],
        (40, 32, 24, 24, 20, 50),
    )
    if not comp:
        _para(pdf, "No predicted values were recorded.")
    _heading(pdf, "Design values of the board", 11)
    _table(pdf, ["Design value", "Value"], design_rows(board), (95, 95))

    for stage in content.get("stages", []):
        pdf.add_page()
        _heading(pdf, f"Stage: {stage.get('title') or stage.get('id')}", 13)
        for c in stage.get("cautions") or []:
            _para(pdf, f"CAUTION: {c}")
        for step in stage.get("steps") or []:
            status = step.get("status", "")
            _heading(
                pdf,
                f"{step.get('title') or step.get('id')}: {STATUS_WORDS.get(status, status)}",
                10,
            )
            for c in step.get("cautions") or []:
                _para(pdf, f"Caution: {c}")
            attempts = step.get("attempts") or []
            if not attempts:
                _para(pdf, "No attempt recorded.")
            else:
                final = attempts[-1]
                _para(pdf, f"Decided by attempt {final.get('number')} of {len(attempts)}.")
                vrows = []
                for v in final.get("verdicts") or []:
                    lim, unit = v.get("limit") or {}, v.get("unit", "")
                    limit = " .. ".join(
                        fmt_value(lim.get(k), unit) if lim.get(k) is not None else "-"
                        for k in ("min", "max")
                    )
                    vrows.append(
                        [
                            v.get("metric") or v.get("target"),
                            fmt_value(v.get("value"), unit),
                            limit,
                            fmt_value(v.get("margin"), unit),
                            fmt_value(v.get("guard_band"), unit),
                            OUTCOME_WORDS.get(v.get("outcome"), v.get("outcome")),
                        ]
                    )
                _table(
                    pdf,
                    ["Quantity", "Measured", "Limits", "Margin", "Guard band", "Verdict"],
                    vrows,
                    (44, 30, 40, 26, 22, 28),
                )
                judged = {v.get("target") for v in final.get("verdicts") or []}
                also = [
                    f"{name} {fmt_value(m)}"
                    for name, m in sorted((final.get("metrics") or {}).items())
                    if name not in judged
                ]
                if also:
                    _para(pdf, "Also measured (reported, not judged): " + "; ".join(also))
                for note in final.get("notes") or []:
                    _para(pdf, f"Note: {note}")
                soak = soak_trace(final)
                if soak is not None:
                    _draw(
                        pdf, soak, f"{soak.t.size} temperature readings; dashed: first-order fit."
                    )
                for wave in final.get("waveforms") or []:
                    _plot(pdf, wave)
            hist = [
                [
                    str(a.get("number")),
                    fmt_time(a.get("started")),
                    a.get("operator") or "-",
                    OUTCOME_WORDS.get(a.get("outcome"), a.get("outcome")),
                    "; ".join(a.get("notes") or []),
                ]
                for a in attempts
            ] + [
                [
                    ev.get("kind"),
                    fmt_time(ev.get("at")),
                    ev.get("by") or "-",
                    "",
                    ev.get("text") or "",
                ]
                for ev in step.get("events") or []
            ]
            _table(
                pdf,
                ["Attempt / event", "When", "Who", "Verdict", "Note"],
                hist,
                (22, 50, 25, 33, 60),
            )
            for earlier in attempts[:-1]:  # superseded tries stay in the record as evidence
                if earlier.get("waveforms"):
                    word = OUTCOME_WORDS.get(earlier.get("outcome"), earlier.get("outcome"))
                    _para(pdf, f"Earlier attempt {earlier.get('number')} ({word}):", "B")
                    for wave in earlier["waveforms"]:
                        _plot(pdf, wave)
    return bytes(pdf.output())
