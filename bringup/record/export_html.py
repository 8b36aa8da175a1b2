"""The HTML record: one self-contained, printable file (inline CSS and SVG, no scripts).

Order of the page: the summary (board, serial, overall outcome, open items, sign-offs), the
cautions, the bench, the design-vs-measured comparison, then each stage with its results,
plots and attempt history, and last the record's identity (schema, digests, chain head).
"""

from __future__ import annotations

from html import escape
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
.overall{font-size:1.1rem;font-weight:bold;border:2px solid #333;padding:.4rem .6rem}
.caution{border-left:5px solid #8a5a00;background:#fbf3e2;padding:.3rem .6rem;margin:.3rem 0}
figure{margin:.5rem 0;break-inside:avoid}
figcaption{font-size:.8rem;color:#444}
.earlier{border-left:3px dotted #777;padding-left:.6rem;margin:.6rem 0}
h4{font-size:.95rem;margin:.6rem 0 .3rem}
footer{margin-top:2rem;font-size:.8rem;color:#333;border-top:1px solid #999}
@media print{body{max-width:none;margin:0}section.stage{break-before:page}
a{color:inherit;text-decoration:none}}
"""


def _e(value: Any) -> str:
    return escape("" if value is None else str(value))


def _table(head: list[str], rows: list[list[str]], raw: bool = False) -> str:
    """A table; cells are escaped unless ``raw`` (then the caller escaped them)."""
    out = ["<table><thead><tr>", *(f"<th>{_e(h)}</th>" for h in head), "</tr></thead><tbody>"]
    for row in rows:
        out.append("<tr>" + "".join(f"<td>{c if raw else _e(c)}</td>" for c in row) + "</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def _pairs(rows: list[list[str]]) -> str:
    """A two-column table of names and values, without a header row."""
    body = "".join(f'<tr><th scope="row">{_e(a)}</th><td>{_e(b)}</td></tr>' for a, b in rows)
    return f"<table>{body}</table>"


def _tag(status: str) -> str:
    return f'<span class="tag tag-{_e(status)}">{_e(STATUS_WORDS.get(status, status))}</span>'


def _summary(content: dict, signatures: list[dict], digest: str) -> str:
    session, board = content.get("session", {}), content.get("board", {})
    summary = content.get("summary", {})
    checklist = content.get("checklist", {})
    counts = summary.get("counts", {})
    rows = [
        ["Board", f"{board.get('name', '-')} rev {board.get('revision', '-')}"],
        ["Serial number", session.get("serial", "-")],
        ["Session", session.get("id", "-")],
        ["Checklist", checklist_label(checklist)],
        ["Operators", ", ".join(session.get("operators") or []) or "-"],
        ["Started", fmt_time(session.get("started"))],
        ["Last entry", fmt_time(session.get("ended"))],
        ["Steps", ", ".join(f"{v} {k}" for k, v in sorted(counts.items())) or "-"],
        ["Record digest (SHA-256)", digest],
        ["Log chain head", (content.get("log") or {}).get("chain_head") or "-"],
    ]
    overall = summary.get("overall", "incomplete")
    out = [
        '<section id="summary"><h2>Summary</h2>',
        f'<p class="overall">Outcome: {_e(OVERALL_WORDS.get(overall, overall))}</p>',
        _pairs([[a, str(b)] for a, b in rows]),
        "<h3>Open items</h3>",
    ]
    items = summary.get("open_items") or []
    out.append(
        "<ul>" + "".join(f"<li>{_e(i)}</li>" for i in items) + "</ul>"
        if items
        else "<p>None: every step is finished and every failure carries a waiver.</p>"
    )
    exceptions = summary.get("exceptions") or []
    if exceptions:
        out.append("<h3>Waivers and skips</h3><ul>")
        out += [f"<li>{_e(x)}</li>" for x in exceptions]
        out.append("</ul>")
    out.append("<h3>Sign-off</h3>")
    if signatures:
        out.append(
            _table(
                ["Role", "Name", "Signed (UTC)", "Key fingerprint"],
                [
                    [s.get("role"), s.get("name"), s.get("signed_at"), s.get("key_fingerprint")]
                    for s in signatures
                ],
            )
        )
    else:
        out.append("<p>Not signed yet.</p>")
    out.append("</section>")
    return "".join(out)


def _cautions(content: dict) -> str:
    out = ['<section id="cautions"><h2>Cautions</h2>']
    out += [f'<p class="caution">{_e(c)}</p>' for c in GENERAL_CAUTIONS]
    for stage in content.get("stages", []):
        for where, c in step_cautions(stage):
            out.append(f'<p class="caution"><b>{_e(where)}:</b> {_e(c)}</p>')
    out.append("</section>")
    return "".join(out)


def _bench(content: dict) -> str:
    bench = content.get("bench", {})
    rows = []
    for inst in bench.get("instruments", []):
        probes = "; ".join(probe_text(c) for c in inst.get("channels") or [])
        rows.append(
            [
                inst.get("id"),
                inst.get("idn") or "-",
                inst.get("resource") or "-",
                inst.get("profile") or "-",
                inst.get("calibration_due") or "not given",
                probes or "-",
            ]
        )
    kind = "simulated bench (no real instruments)" if bench.get("simulated") else "bench"
    return (
        f'<section id="bench"><h2>Bench</h2><p>{_e(kind)}</p>'
        + _table(["Role", "*IDN?", "Resource", "Profile", "Calibration due", "Probes"], rows)
        + "</section>"
    )


def _comparison(content: dict) -> str:
    rows = comparison_rows(content)
    body = (
        _table(
            ["Step", "Quantity", "Design", "Basis", "Measured", "Deviation", "Note"],
            [
                [
                    r["where"],
                    r["quantity"],
                    r["predicted"],
                    r["basis"],
                    r["measured"],
                    r["deviation"],
                    r["note"],
                ]
                for r in rows
            ],
        )
        if rows
        else "<p>No predicted values were recorded.</p>"
    )
    return f'<section id="design"><h2>Design against measurement</h2>{body}</section>'


def _results(attempt: dict) -> str:
    rows = []
    for v in attempt.get("verdicts") or []:
        lim = v.get("limit") or {}
        unit = v.get("unit", "")
        limit = " .. ".join(
            [
                fmt_value(lim.get("min"), unit) if lim.get("min") is not None else "-",
                fmt_value(lim.get("max"), unit) if lim.get("max") is not None else "-",
            ]
        )
        rows.append(
            [
                v.get("metric") or v.get("target"),
                fmt_value(v.get("value"), unit),
                limit,
                fmt_value(v.get("margin"), unit),
                fmt_value(v.get("guard_band"), unit),
                OUTCOME_WORDS.get(v.get("outcome"), v.get("outcome")),
                v.get("reason") or "",
            ]
        )
    other = [[name, fmt_value(m)] for name, m in sorted((attempt.get("metrics") or {}).items())]
    out = ""
    if rows:
        out += _table(
            ["Quantity", "Measured", "Limits", "Margin", "Guard band", "Verdict", "Why"], rows
        )
    if other:
        out += (
            "<details open><summary>All metrics</summary>"
            + _table(["Metric", "Value"], other)
            + "</details>"
        )
    settings = attempt.get("settings") or {}
    if settings:
        out += (
            "<details><summary>Settings</summary>"
            + _table(["Setting", "Value"], [[k, fmt_value(v)] for k, v in sorted(settings.items())])
            + "</details>"
        )
    return out


def _svg(trace: Trace) -> str:
    return plot_svg(trace.t, trace.y, title=trace.name, unit=trace.unit, markers=trace.markers,
                    overlay=trace.model)  # fmt: skip


def _plots(attempt: dict) -> str:
    out = []
    soak = soak_trace(attempt)
    if soak is not None:
        out.append(
            f"<figure>{_svg(soak)}<figcaption>{soak.t.size} readings of the heatsink "
            "temperature; dashed: the first-order fit T(t) = T_final - (T_final - T_0) "
            "exp(-t/tau).</figcaption></figure>"
        )
    for wave in attempt.get("waveforms") or []:
        trace = decode_trace(wave)
        if trace is None:
            out.append(f"<p>Waveform {_e(wave.get('name'))}: cannot be decoded.</p>")
            continue
        svg = plot_svg(
            trace.t,
            trace.y,
            title=trace.name,
            unit=trace.unit,
            markers=trace.markers,
            overlay=trace.model,
        )
        caption = (
            f"{_e(wave.get('name'))}: {int(trace.t.size)} samples"
            + (f", net {_e(wave.get('net'))}" if wave.get("net") else "")
            + "; drawn as the min/max of each pixel column."
        )
        out.append(f"<figure>{svg}<figcaption>{caption}</figcaption></figure>")
        zoom = zoom_trace(trace)
        if zoom is not None:
            out.append(
                f"<figure>{_svg(zoom)}<figcaption>{_e(wave.get('name'))}: the first edge, "
                f"{int(zoom.t.size)} samples around its reference-level crossings."
                "</figcaption></figure>"
            )
    return "".join(out)


def _history(step: dict) -> str:
    rows = []
    for a in step.get("attempts") or []:
        rows.append(
            [
                str(a.get("number")),
                fmt_time(a.get("started")),
                a.get("operator") or "-",
                OUTCOME_WORDS.get(a.get("outcome"), a.get("outcome")),
                "; ".join(a.get("notes") or []) or "",
            ]
        )
    for ev in step.get("events") or []:
        rows.append(
            [
                ev.get("kind", "note"),
                fmt_time(ev.get("at")),
                ev.get("by") or "-",
                "",
                ev.get("text") or "",
            ]
        )
    return _table(["Attempt / event", "When", "Who", "Verdict", "Note"], rows) if rows else ""


def _stage(stage: dict) -> str:
    out = [f'<section class="stage" id="stage-{_e(stage.get("id"))}">']
    out.append(f"<h2>Stage: {_e(stage.get('title') or stage.get('id'))}</h2>")
    for c in stage.get("cautions") or []:
        out.append(f'<p class="caution">{_e(c)}</p>')
    for step in stage.get("steps") or []:
        out.append(
            f"<h3>{_e(step.get('title') or step.get('id'))} {_tag(step.get('status', ''))}</h3>"
        )
        for c in step.get("cautions") or []:
            out.append(f'<p class="caution">Caution: {_e(c)}</p>')
        attempts = step.get("attempts") or []
        if attempts:
            final = attempts[-1]
            out.append(f"<p>Decided by attempt {_e(final.get('number'))} of {len(attempts)}.</p>")
            out.append(_results(final))
            out.append(_plots(final))
        else:
            out.append("<p>No attempt recorded.</p>")
        out.append(_history(step))
        for earlier in attempts[:-1]:  # superseded tries stay in the record as evidence
            out.append(
                f'<div class="earlier"><h4>Earlier attempt {_e(earlier.get("number"))}: '
                f"{_e(OUTCOME_WORDS.get(earlier.get('outcome'), earlier.get('outcome')))}</h4>"
                f"{_results(earlier)}{_plots(earlier)}</div>"
            )
    out.append("</section>")
    return "".join(out)


def render_html(record: dict) -> str:
    """The HTML text of an exported record (``{"schema", "content", "seal", "signatures"}``)."""
    content = record["content"]
    digest = record.get("seal", {}).get("content_sha256", "")
    session, board = content.get("session", {}), content.get("board", {})
    title = f"Bring-up record {session.get('serial', '')}, {board.get('name', '')}"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{_e(title)}</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{_e(title)}</h1>",
        _summary(content, record.get("signatures") or [], digest),
        _cautions(content),
        _bench(content),
        _comparison(content),
        *(_stage(s) for s in content.get("stages", [])),
        '<section id="identity"><h2>Identity of this record</h2>',
        _pairs(
            [
                ["Schema", record.get("schema", "")],
                ["Content digest (SHA-256 of the canonical JSON)", digest],
                ["Log chain head", (content.get("log") or {}).get("chain_head") or "-"],
                ["Log entries", str((content.get("log") or {}).get("entries", "-"))],
            ]
        ),
        "<h3>Design values of the board</h3>",
        _table(["Design value", "Value"], design_rows(board)),
        "</section>",
        f"<footer>Record {_e(session.get('serial'))} / session {_e(session.get('id'))} / "
        f"digest {_e(digest)}. Check it with: bringup verify RECORD.json --key PUBLIC_KEY</footer>",
        "</body></html>",
    ]
    return "\n".join(parts) + "\n"
