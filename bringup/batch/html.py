"""The batch as one self-contained HTML page: inline CSS and SVG, no script, no network.

Sections: the serials (one row each), the values (one row per serial, one column per metric,
each value with its verdict and its place in the batch), the statistics per metric, one strip
plot per metric (every serial against the limits), and the history of each serial measured
more than once. Every text goes through the record's ``_e`` (HTML-escaped, acting characters
shown as visible stand-ins), so serials and names are shown exactly as typed.
"""

from __future__ import annotations

import math

from bringup.analysis.batch import MIN_CAPABILITY_BOARDS
from bringup.analysis.quantities import format_quantity
from bringup.batch.collect import Batch, Row
from bringup.batch.report import RULE_TEXT, limit_text, signed_text
from bringup.record.export_html import _CSS, _e
from bringup.record.svg import StripPoint, strip_svg

__all__ = ["render_batch_html"]

_EXTRA_CSS = (
    ".flag{font-weight:bold;background:#f6d4cf}.bad{text-decoration:underline}"
    "td.num{text-align:right;white-space:nowrap}table.wide{font-size:.8rem}"
)


def _serials_table(batch: Batch) -> str:
    head = ("serial", "bench", "progress", "verdict", "signed", "last activity", "session")
    out = ["<table><thead><tr>", *(f"<th>{h}</th>" for h in head), "</tr></thead><tbody>"]
    for row in batch.rows:
        s = row.summary
        total = s.steps_total if s.steps_total is not None else "?"
        bench = "rehearsal (simulated bench)" if s.rehearsal else "real bench"
        retake = f" (of {len(row.sessions)}: history below)" if len(row.sessions) > 1 else ""
        state = "" if s.state == "open" else f" ({s.state})"
        out.append(
            f"<tr><td>{_e(row.serial)}</td><td>{bench}</td><td>{s.steps_done}/{total}</td>"
            f"<td>{_e((s.verdict or 'not-started') + state)}</td><td>{_e(signed_text(row))}</td>"
            f"<td>{_e(s.last_activity_utc)}</td><td>{_e(s.id)}{_e(retake)}</td></tr>"
        )
    out.append("</tbody></table>")
    return "".join(out)


def _cell(batch: Batch, row: Row, key: str, unit: str) -> str:
    cell = batch.cell(row.serial, key)
    if cell is None:
        return "<td>-</td>"
    reading, z, outlier = cell
    words = [format_quantity(reading.value, unit)]
    if reading.outcome != "pass":
        words.append(reading.outcome)
    if outlier:
        words.append(f"outlier, M {z:+.1f}" if math.isfinite(z) else "outlier")
    css = " flag" if outlier else (" bad" if reading.outcome != "pass" else "")
    return f'<td class="num{css}">{_e(", ".join(words))}</td>'


def _values_table(batch: Batch) -> str:
    out = ['<table class="wide"><thead><tr><th>serial</th>']
    out += [f"<th>{_e(c.name)}<br>{_e(limit_text(c))}</th>" for c in batch.columns]
    out.append("</tr></thead><tbody>")
    for row in batch.rows:
        cells = "".join(_cell(batch, row, c.key, c.unit) for c in batch.columns)
        out.append(f'<tr><th scope="row">{_e(row.serial)}</th>{cells}</tr>')
    out.append("</tbody></table>")
    return "".join(out)


def _capability_text(batch: Batch, key: str) -> str:
    d = batch.stats[key]
    c = d.capability
    if c is None:
        return f"n < {MIN_CAPABILITY_BOARDS}" if d.n < MIN_CAPABILITY_BOARDS else "-"
    cpk = f"Cpk {c.cpk:.2f} ({c.cpk_interval[0]:.2f} .. {c.cpk_interval[1]:.2f})"
    if c.cp is None or c.cp_interval is None:
        return cpk
    return f"Cp {c.cp:.2f} ({c.cp_interval[0]:.2f} .. {c.cp_interval[1]:.2f}); {cpk}"


def _stats_table(batch: Batch) -> str:
    head = ("metric", "n", "median", "spread", "min", "max", "limit", "capability", "outliers")
    out = ["<table><thead><tr>", *(f"<th>{h}</th>" for h in head), "</tr></thead><tbody>"]
    for c in batch.columns:
        d = batch.stats.get(c.key)
        if d is None:
            continue
        flagged = [s for s, f in zip(batch.serials_of[c.key], d.outliers, strict=True) if f]
        numbers = (d.median, d.scaled_mad, d.minimum, d.maximum)
        out.append(
            f'<tr><td>{_e(c.name)}</td><td class="num">{d.n}</td>'
            + "".join(f'<td class="num">{_e(format_quantity(v, c.unit))}</td>' for v in numbers)
            + f"<td>{_e(limit_text(c))}</td><td>{_e(_capability_text(batch, c.key))}</td>"
            f"<td>{_e(', '.join(flagged) or '-')}</td></tr>"
        )
    out.append("</tbody></table>")
    return "".join(out)


def _strips(batch: Batch) -> str:
    figures = []
    for c in batch.columns:
        d = batch.stats.get(c.key)
        if d is None:
            continue
        serials = batch.serials_of[c.key]
        points = [
            StripPoint(batch.cell(s, c.key)[0].value, s, flag)
            for s, flag in zip(serials, d.outliers, strict=True)
        ]
        svg = strip_svg(
            points, title=c.name, unit=c.unit, lower=c.lower, upper=c.upper, centre=d.median
        )
        figures.append(
            f'<figure class="strip">{svg}<figcaption>{_e(c.label)}: {d.n} serials, limit '
            f"{_e(limit_text(c))}; squares are outliers, named</figcaption></figure>"
        )
    return "".join(figures)


def _history(batch: Batch) -> str:
    parts = []
    for row in batch.rows:
        if not row.retaken:
            continue
        out = [
            f"<details><summary>{_e(row.serial)}: {len(row.sessions)} sessions, "
            f"{len(row.history)} attempts</summary><table><thead><tr><th>session</th>"
            "<th>step</th><th>attempt</th><th>outcome</th><th>recorded</th><th>shown</th>"
            "</tr></thead><tbody>"
        ]
        for h in row.history:
            out.append(
                f"<tr><td>{_e(h.session_id)}</td><td>{_e(h.stage + '.' + h.step)}</td>"
                f"<td>{h.attempt_no}</td><td>{_e(h.outcome)}</td><td>{_e(h.recorded_utc)}</td>"
                f"<td>{'yes' if h.shown else ''}</td></tr>"
            )
        out.append("</tbody></table></details>")
        parts.append("".join(out))
    return "".join(parts) or "<p>No serial was measured more than once.</p>"


def render_batch_html(batch: Batch, where: str) -> str:
    """The batch report page (UTF-8 text). ``where`` names the log it was read from."""
    revision = f" rev {batch.revision}" if batch.revision else ""
    title = f"Batch report: {batch.board}{revision}"
    notes = "".join(f'<p class="caution">{_e(n)}</p>' for n in batch.notes)
    rehearsal = (
        '<p class="rehearsal">Rehearsal sessions (simulated bench) are marked: no board was '
        "measured in them.</p>"
        if any(r.summary.rehearsal for r in batch.rows)
        else ""
    )
    return (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        f"<title>{_e(title)}</title><style>{_CSS}{_EXTRA_CSS}</style></head><body>"
        f"<h1>{_e(title)}</h1><p>{len(batch.rows)} serials, {len(batch.columns)} judged "
        f"metrics, read from {_e(where)}.</p>{rehearsal}{notes}"
        f"<p>{_e('Spread = MAD x 1.4826 (a standard deviation for normal data); ' + RULE_TEXT)}"
        "</p>"
        f"<section><h2>Serials</h2>{_serials_table(batch)}</section>"
        f"<section><h2>Values</h2>{_values_table(batch)}</section>"
        f"<section><h2>Across the batch</h2>{_stats_table(batch)}</section>"
        f"<section><h2>Every serial against the limits</h2>{_strips(batch)}</section>"
        f"<section><h2>Serials measured more than once</h2>{_history(batch)}</section>"
        "</body></html>\n"
    )
