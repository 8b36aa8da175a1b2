"""The record as a document: what the HTML and PDF records show, in order, as plain blocks.

``build_document(record)`` walks the record once and returns a ``Document``: sections of
headings, paragraphs, tables, lists and figures, all text still as typed or logged. The two
exporters only lay these blocks out (``export_html`` as HTML elements, ``export_pdf`` as fpdf2
cells), so both files tell the same story in the same order:

1. the summary (board, serial, outcome, open items, waivers and skips, sign-offs);
2. the cautions; 3. the bench; 4. the design against the measurement;
5. each stage on its own page: per step its cautions, the deciding attempt's verdicts, its
   metrics by label with their uncertainty and how it was found, what was probed where (each
   scope channel as set and as read back), the other settings, notes and plots, the history
   of attempts and events, then earlier attempts;
6. the record's identity (schema, digests, chain head, the board's design values).

No escaping happens here: each renderer makes every text literal in its own medium (the text a
person typed or a file supplied may hold markup, escapes or direction overrides).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from bringup.record.schemas import is_rehearsal
from bringup.record.sign_off import sign_off_state
from bringup.record.view import (
    GENERAL_CAUTIONS,
    OUTCOME_WORDS,
    REHEARSAL_MARK,
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

__all__ = [
    "Aside",
    "Bullets",
    "Document",
    "Figure",
    "Heading",
    "Paragraph",
    "Section",
    "Table",
    "build_document",
]


@dataclass(frozen=True)
class Heading:
    """A heading: level 2 a section, 3 a step or a part of the summary, 4 an earlier attempt.
    ``status`` (a ``STATUS_WORDS`` key) is shown beside a step's title."""

    text: str
    level: int
    status: str | None = None


@dataclass(frozen=True)
class Paragraph:
    """Running text. ``kind``: "plain", "strong" (a lead-in), "outcome" (the overall verdict),
    "rehearsal" (the simulated bench's mark), "flag" (something a reviewer must see: a past-due
    calibration) or "caution" (``lead`` names where the caution comes from)."""

    text: str
    kind: str = "plain"
    lead: str | None = None


@dataclass(frozen=True)
class Bullets:
    """A list; ``empty`` is said instead when there are no items."""

    items: tuple[str, ...]
    empty: str = ""


@dataclass(frozen=True)
class Table:
    """Rows of text cells under ``head`` (``head`` None: a name/value table without a header).
    ``widths``: the columns' relative widths in millimetres on an A4 page (they sum to 190).
    ``fold``: a caption under which the table may be folded away (HTML ``details``), shown
    open unless ``folded``. ``empty``: said instead of a table without rows."""

    head: tuple[str, ...] | None
    rows: tuple[tuple[str, ...], ...]
    widths: tuple[int, ...]
    fold: str | None = None
    folded: bool = False
    empty: str = ""


@dataclass(frozen=True)
class Figure:
    """A plot of ``trace`` with its caption."""

    trace: Trace
    caption: str


@dataclass(frozen=True)
class Aside:
    """Blocks set apart from the flow: an earlier, superseded attempt kept as evidence."""

    blocks: tuple[Any, ...]


Block = Heading | Paragraph | Bullets | Table | Figure | Aside


@dataclass(frozen=True)
class Section:
    """A part of the record. ``key`` names it (an HTML id); ``stage``: a checklist stage."""

    key: str
    title: str
    blocks: tuple[Block, ...]
    stage: bool = False
    #: the PDF starts a new page for it (the one-minute summary stands on its own page)
    starts_page: bool = False


@dataclass(frozen=True)
class Document:
    """The whole record as blocks, with what every page repeats (``running_head``, ``digest``
    and, for a session on a simulated bench, ``rehearsal``: the mark every page carries)."""

    title: str
    running_head: str
    digest: str
    serial: str
    session: str
    operators: tuple[str, ...]
    #: the session's last entry and start times (ISO 8601 UTC), the first that parses dates a PDF
    times_utc: tuple[str, ...]
    sections: tuple[Section, ...] = field(default_factory=tuple)
    closing: str = ""
    rehearsal: str | None = None


def _text(value: Any, default: str = "") -> str:
    return default if value is None else str(value)


def _calibration_text(inst: dict) -> str:
    """One instrument's calibration as the record states it: due date, certificate, and its
    state on the session's day (``snapshot_reading.calibration_state``); flagged in capitals
    when past due or without a date."""
    due, cert = inst.get("calibration_due"), inst.get("calibration_certificate")
    cal = inst.get("calibration") if isinstance(inst.get("calibration"), dict) else {}
    state, on = cal.get("state"), cal.get("on")
    cert_text = f", certificate {_text(cert)}" if cert else ", no certificate named"
    day = f" on {_text(on)}" if on else ""
    if state == "simulated":
        return "simulated: no calibration applies"
    if state == "past-due":
        return f"PAST DUE{day} (due {_text(due)}{cert_text})"
    if state == "no-date":
        return f"NO DUE DATE GIVEN{cert_text}"
    if state == "unreadable":
        return f"DUE DATE UNREADABLE ({_text(due)!r}{cert_text})"
    if state == "in-date":
        return f"in date{day} (due {_text(due)}{cert_text})"
    return f"due {_text(due)}" if due else "not given"  # a record made before version 3


def calibration_flags(content: dict) -> list[str]:
    """One line per instrument whose calibration is past due, undated or unreadable."""
    flags = []
    for inst in (content.get("bench") or {}).get("instruments") or []:
        state = (inst.get("calibration") or {}).get("state")
        if state in ("past-due", "no-date", "unreadable"):
            flags.append(f"Calibration of the {_text(inst.get('id'))}: {_calibration_text(inst)}")
    return flags


def _glance(content: dict) -> Table:
    """Every step in one line: its stage, title, status and how many attempts it took."""
    rows = tuple(
        (
            _text(stage.get("title") or stage.get("id")),
            _text(step.get("title") or step.get("id")),
            STATUS_WORDS.get(_text(step.get("status")), _text(step.get("status"))),
            _text(len(step.get("attempts") or [])),
        )
        for stage in content.get("stages", [])
        for step in stage.get("steps") or []
    )
    return Table(("Stage", "Step", "Result", "Attempts"), rows, (45, 85, 40, 20))


def _summary(record: dict, digest: str) -> Section:
    """The page a reviewer reads in one minute: outcome and who did what, flags, every step's
    result, open items and waivers, the signatures with their meaning and time."""
    content = record["content"]
    session, board = content.get("session", {}), content.get("board", {})
    summary = content.get("summary", {})
    state = sign_off_state(record)
    rehearsal = is_rehearsal(content)
    pairs = (
        ("Board", f"{_text(board.get('name'), '-')} rev {_text(board.get('revision'), '-')}"),
        ("Serial number", _text(session.get("serial"), "-")),
        ("Bench", "simulated: a rehearsal" if rehearsal else "real instruments"),
        ("Session", _text(session.get("id"), "-")),
        ("Checklist", checklist_label(content.get("checklist", {}))),
        ("Started / last entry", f"{fmt_time(session.get('started'))} / "
                                 f"{fmt_time(session.get('ended'))}"),
        ("Calibration", "; ".join(calibration_lines(content)) or "-"),
        ("Content digest (SHA-256)", digest),
    )  # fmt: skip
    flags = calibration_flags(content)
    blocks: list[Block] = [
        *([Paragraph(REHEARSAL_MARK, "rehearsal")] if rehearsal else []),
        Paragraph(f"Outcome: {state.headline}", "outcome"),
        *(Paragraph(line, "strong") for line in state.who),
        *(Paragraph(flag, "flag") for flag in flags),
        Table(None, pairs, (45, 145)),
        _glance(content),
        Heading("Open items", 3),
        Bullets(
            tuple(map(str, summary.get("open_items") or [])),
            "None: every step is finished and every failure carries a waiver.",
        ),
    ]
    exceptions = tuple(map(str, summary.get("exceptions") or []))
    if exceptions:
        blocks += [Heading("Waivers and skips", 3), Bullets(exceptions)]
    head = ("Role", "Meaning", "Printed name", "Signed (UTC, local offset)", "Key id", "Signature")
    blocks += [
        Heading("Signatures", 3),
        Table(head, state.rows, (18, 30, 30, 44, 38, 30), empty="Not signed yet."),
    ]
    return Section("summary", "Summary", tuple(blocks))


def _cautions(content: dict) -> Section:
    """The cautions for the whole bench; each stage's own are said once, at its start."""
    blocks: list[Block] = [Paragraph(c, "caution") for c in GENERAL_CAUTIONS]
    blocks.append(Paragraph("Each stage lists its own cautions once, at its start."))
    return Section("cautions", "Cautions", tuple(blocks), starts_page=True)


def _bench(content: dict) -> Section:
    bench = content.get("bench") or {}
    rows = []
    for inst in bench.get("instruments", []):
        probes = "; ".join(probe_text(c) for c in inst.get("channels") or [])
        rows.append(
            (
                _text(inst.get("id")),
                _text(inst.get("idn") or "-"),
                _text(inst.get("resource") or "-"),
                _text(inst.get("profile") or "-"),
                _calibration_text(inst),
                probes or "-",
            )
        )
    kind = "simulated bench (no real instruments)" if bench.get("simulated") else "bench"
    head = (
        "Role",
        "*IDN?",
        "Resource",
        "Profile",
        "Calibration",
        "Probes as the bench file wires them",
    )
    table = Table(head, tuple(rows), (16, 38, 36, 24, 36, 40))
    return Section("bench", "Bench", (Paragraph(kind), table, *_channel_map(content)))


def _channel_steps(content: dict) -> tuple[dict[str, str], list[tuple[str, dict[str, str]]]]:
    """(channel -> net as the bench file wires it, [(step title, channel -> "net (probe)")])
    from each step's deciding attempt's scope settings."""
    wired: dict[str, str] = {}
    for inst in (content.get("bench") or {}).get("instruments") or []:
        if inst.get("id") == "scope":
            wired = {_text(c.get("id")): _text(c.get("net")) for c in inst.get("channels") or []}
    steps: list[tuple[str, dict[str, str]]] = []
    for stage in content.get("stages", []):
        for step in stage.get("steps") or []:
            final = (step.get("attempts") or [None])[-1]
            scope = ((final or {}).get("settings") or {}).get("scope")
            channels = scope.get("channels") if isinstance(scope, dict) else None
            if not isinstance(channels, list):
                continue
            used = {
                _text(
                    c.get("channel")
                ): f"{_text(c.get('net'), '-')} ({_text(c.get('probe'), '-')})"
                for c in channels
                if isinstance(c, dict)
            }
            steps.append((_text(step.get("title") or step.get("id")), used))
    return wired, steps


def channel_moves(content: dict) -> str:
    """One sentence: which probes the steps moved from where the bench file wires them."""
    wired, steps = _channel_steps(content)
    if not steps:
        return "no step logged its scope channels."
    moved = sorted(
        {
            f"CH{ch} from {wired[ch]} to {used[ch].split(' (')[0]}"
            for _, used in steps
            for ch in used
            if ch in wired and used[ch].split(" (")[0] != wired[ch]
        }
    )
    if not moved:
        return "every step probed the nets where the bench file wires them."
    return "steps moved probes from where the bench file wires them: " + "; ".join(moved) + "."


def calibration_lines(content: dict) -> list[str]:
    """'scope: PAST DUE on ...' for each instrument of the bench."""
    return [
        f"{_text(inst.get('id'))}: {_calibration_text(inst)}"
        for inst in (content.get("bench") or {}).get("instruments") or []
    ]


def _channel_map(content: dict) -> list[Block]:
    """Where each scope channel's probe was at each step (from the attempts' scope settings),
    beside where the bench file wires it: a probe moved for a step is said, never hidden."""
    wired, steps = _channel_steps(content)
    if not steps:
        return []
    names = sorted({*wired, *(ch for _, used in steps for ch in used)}, key=_channel_order)
    rows = [("Bench file", *(wired.get(ch, "-") for ch in names))]
    rows += [(title, *(used.get(ch, "-") for ch in names)) for title, used in steps]
    said = channel_moves(content)
    width = max(10, (190 - 50) // max(len(names), 1))
    return [
        Paragraph("Where each scope channel was, step by step (the deciding attempt)", "strong"),
        Paragraph(said[0].upper() + said[1:]),
        Table(("Step", *(f"CH{ch}" for ch in names)), tuple(rows),
              (190 - width * len(names), *(width,) * len(names))),
    ]  # fmt: skip


def _channel_order(name: str) -> tuple[int, str]:
    return (int(name), "") if name.isdigit() else (1 << 30, name)


def _comparison(content: dict) -> Section:
    keys = ("where", "quantity", "predicted", "basis", "measured", "deviation", "note")
    rows = tuple(tuple(_text(r[k]) for k in keys) for r in comparison_rows(content))
    head = ("Step", "Quantity", "Design", "Basis", "Measured", "Deviation", "Note")
    table = Table(head, rows, (30, 26, 22, 24, 22, 18, 48),
                  empty="No predicted values were recorded.")  # fmt: skip
    return Section("design", "Design against measurement", (table,))


def _limit_text(verdict: dict) -> str:
    lim, unit = verdict.get("limit") or {}, verdict.get("unit", "")
    return " .. ".join(
        fmt_value(lim.get(k), unit) if lim.get(k) is not None else "-" for k in ("min", "max")
    )


def _setting_text(value: Any) -> str:
    """A logged setting as written: numbers to 6 significant digits, lists comma-separated."""
    if isinstance(value, bool) or value is None:
        return {True: "on", False: "off", None: "-"}[value]
    if isinstance(value, int | float):
        return f"{value:g}"
    if isinstance(value, list):
        return ", ".join(_setting_text(v) for v in value) or "-"
    return str(value)


def _setting_rows(settings: dict, prefix: str = "") -> list[tuple[str, str]]:
    """(dotted name, value) for every leaf of the attempt's nested settings (``supply.ovp_v``);
    a list of tables (the scope's channels) is numbered from 1."""
    rows: list[tuple[str, str]] = []
    for key, value in sorted(settings.items()):
        name = f"{prefix}{key}"
        if isinstance(value, dict):
            rows += _setting_rows(value, f"{name}.")
        elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            for i, item in enumerate(value, start=1):
                rows += _setting_rows(item, f"{name}.{i}.")
        else:
            rows.append((name, _setting_text(value)))
    return rows


def _label(attempt: dict, name: str, verdict: dict | None = None) -> str:
    """A metric's label as logged (the board target's label for a judged one), else its id."""
    metric = (attempt.get("metrics") or {}).get(name)
    for source in (verdict, metric):
        if isinstance(source, dict) and source.get("label"):
            return _text(source["label"])
    return _text(name)


def _number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _uncertainty(attempt: dict, name: str) -> tuple[str, str]:
    """(the metric's expanded uncertainty U as text, how it was found). From the attempt's
    GUM budget (``extra.details.budgets``, JCGM 100:2008 §6: U = k u_c) when one was logged,
    else the uncertainty its verdict used (ILAC-G8 §4.2), else none was evaluated."""
    budgets = ((attempt.get("extra") or {}).get("details") or {}).get("budgets") or {}
    budget = budgets.get(name) if isinstance(budgets, dict) else None
    unit = _text(((attempt.get("metrics") or {}).get(name) or {}).get("unit"))
    if isinstance(budget, dict) and _number(budget.get("expanded")):
        unit = _text(budget.get("unit") or unit)
        k = budget.get("k")
        parts = [
            f"{_text(c.get('name'))} (u = {fmt_value(c.get('u'), unit)}, {_text(c.get('evaluation'))})"
            for c in budget.get("components") or []
            if isinstance(c, dict)
        ]
        how = f"GUM budget, k = {k:g}" if _number(k) else "GUM budget"
        how += ": " + "; ".join(parts) if parts else ""
        if _number(budget.get("combined")):
            how += f" (u_c = {fmt_value(budget['combined'], unit)}"
            how += f"; largest: {_text(budget['main'])})" if budget.get("main") else ")"
        return fmt_value(budget["expanded"], unit), how
    for v in attempt.get("verdicts") or []:
        if v.get("target") == name and _number(v.get("uncertainty")):
            return (
                fmt_value(v["uncertainty"], v.get("unit") or unit),
                "the uncertainty the verdict used (the target's stated one, or the larger "
                "computed one)",
            )
    return "not evaluated", "reported only, not judged"


def _scope(attempt: dict, bench: dict) -> list[Block]:
    """What was probed where: each scope channel as set for this attempt (net, probe, range,
    offset, coupling, bandwidth limit, record length) and what the record read back (points
    and sample interval of the waveform of that net)."""
    scope = (attempt.get("settings") or {}).get("scope")
    if not isinstance(scope, dict) or not isinstance(scope.get("channels"), list):
        return []
    ratios = {}
    for inst in bench.get("instruments") or []:
        if inst.get("id") == "scope":
            ratios = {str(c.get("id")): c.get("probe_ratio") for c in inst.get("channels") or []}
    waves = {_text(w.get("name")): w for w in attempt.get("waveforms") or []}
    points, duration = scope.get("points"), scope.get("duration_s")
    interval = duration / points if _number(duration) and _number(points) and points else None
    rows = []
    for ch in scope["channels"]:
        if not isinstance(ch, dict):
            continue
        ratio = ratios.get(str(ch.get("channel")))
        probe = _text(ch.get("probe"), "-") + (f", {ratio:g}:1" if _number(ratio) else "")
        wave = waves.get(_text(ch.get("net"))) or {}
        rows.append(
            (
                _text(ch.get("channel"), "-"),
                _text(ch.get("net"), "-"),
                probe,
                fmt_value(ch.get("range_v"), "V"),
                fmt_value(ch.get("offset_v"), "V"),
                _text(ch.get("coupling"), "-"),
                _setting_text(ch.get("bandwidth_limit")),
                f"{_setting_text(points)} / {_setting_text(wave.get('points'))}",
                f"{fmt_value(interval, 's')} / {fmt_value(wave.get('x_increment'), 's')}",
            )
        )
    head = ("Ch", "Net", "Probe", "Range", "Offset", "Coupling", "BW limit",
            "Points set / read", "Sample interval set / read")  # fmt: skip
    blocks: list[Block] = [
        Paragraph("What was probed where: the scope as set, and as read back", "strong"),
        Table(head, tuple(rows), (9, 17, 30, 17, 17, 17, 15, 30, 38)),
    ]
    trigger = scope.get("trigger")
    if isinstance(trigger, dict):
        trig = (
            f"trigger on {_text(trigger.get('net'), '-')}, {_text(trigger.get('slope'), '-')} "
            f"edge at {fmt_value(trigger.get('level_v'), 'V')}"
        )
    else:
        trig = "no trigger (free run)"
    blocks.append(
        Paragraph(
            f"Scope as set: window {fmt_value(duration, 's')}, "
            f"{fmt_value(scope.get('pretrigger_s'), 's')} before the trigger; {trig}. "
            "Read: what the instrument sent with the record of that net (its preamble); "
            "range, offset, coupling and bandwidth limit are as sent, not read back."
        )
    )
    return blocks


def _budget_rows(attempt: dict):
    """Each logged GUM budget (JCGM 100:2008) of the attempt, one row per contribution: the
    quantity, what the contribution is, its type and evaluation, the input's standard
    uncertainty u(x_i), the sensitivity coefficient c_i and |c_i| u(x_i); then a row with the
    combined u_c, k and the expanded U = k u_c."""
    budgets = ((attempt.get("extra") or {}).get("details") or {}).get("budgets") or {}
    if not isinstance(budgets, dict):
        return
    for name in sorted(budgets):
        b = budgets[name]
        if not isinstance(b, dict) or not _number(b.get("expanded")):
            continue
        label, unit = _label(attempt, str(name)), _text(b.get("unit"))
        for c in b.get("components") or []:
            if not isinstance(c, dict):
                continue
            in_unit = _text(c.get("input_unit") or unit)
            u_x = c.get("u_input", c.get("u"))
            sens = c.get("sensitivity")
            yield (label, _text(c.get("name")), _text(c.get("evaluation")),
                   fmt_value(u_x, "" if in_unit == "1" else in_unit),
                   f"{sens:.4g}" if _number(sens) else "1", fmt_value(c.get("u"), unit))  # fmt: skip
        k = b.get("k")
        yield (label, "combined u_c; expanded U = k u_c", f"k = {k:g}" if _number(k) else "",
               fmt_value(b.get("combined"), unit), "", fmt_value(b["expanded"], unit))  # fmt: skip


def _results(attempt: dict, bench: dict | None = None) -> list[Block]:
    """The attempt's verdicts, its metrics with their uncertainty, the scope as set and read
    back, its other settings and its notes."""
    verdicts = tuple(
        (
            _label(attempt, _text(v.get("metric") or v.get("target")), v),
            fmt_value(v.get("value"), v.get("unit", "")),
            _limit_text(v),
            fmt_value(v.get("margin"), v.get("unit", "")),
            fmt_value(v.get("guard_band"), v.get("unit", "")),
            _text(OUTCOME_WORDS.get(v.get("outcome"), v.get("outcome"))),
            _text(v.get("reason")),
        )
        for v in attempt.get("verdicts") or []
    )
    blocks: list[Block] = []
    if verdicts:
        head = ("Quantity", "Measured", "Limits", "Margin", "Guard band", "Verdict", "Why")
        blocks.append(Table(head, verdicts, (34, 24, 36, 22, 20, 24, 30)))
    blocks += _diagnosis(attempt)
    metrics = tuple(
        (_label(attempt, str(name)), fmt_value(m), *_uncertainty(attempt, str(name)))
        for name, m in sorted((attempt.get("metrics") or {}).items())
    )
    if metrics:
        head = ("Quantity", "Value", "Uncertainty U", "How U was found")
        blocks.append(Table(head, metrics, (52, 28, 28, 82), fold="All metrics"))
    budget_rows = tuple(_budget_rows(attempt))
    if budget_rows:
        head = ("Quantity", "Contribution", "Type", "u(xᵢ)", "cᵢ", "|cᵢ|·u(xᵢ)")
        blocks.append(Table(head, budget_rows, (34, 70, 22, 22, 20, 22),
                            fold="Uncertainty budgets (GUM)", folded=True))  # fmt: skip
    blocks += _scope(attempt, bench or {})
    # the scope's channels are in the table of what was probed where, not said twice
    settings = tuple(
        row
        for row in _setting_rows(attempt.get("settings") or {})
        if not row[0].startswith("scope.channels.")
    )
    if settings:
        blocks.append(Table(("Setting", "Value"), settings, (95, 95), fold="Settings", folded=True))
    blocks += [Paragraph(f"Note: {note}") for note in attempt.get("notes") or []]
    return blocks


def _diagnosis(attempt: dict) -> list[Block]:
    """The likely causes of a failed step, most likely first, each with its evidence and the
    check to make at the bench (``extra.details.diagnosis``, ``bringup.analysis.diagnosis``)."""
    found = ((attempt.get("extra") or {}).get("details") or {}).get("diagnosis") or {}
    causes = found.get("causes") or []
    notes = [_text(n) for n in found.get("notes") or []]
    if not causes and not notes:
        return []
    items = tuple(
        " — ".join(
            x
            for x in (
                _text(c.get("title")),
                "; ".join(_text(e) for e in c.get("evidence") or []),
                f"check: {_text(c.get('check'))}" if c.get("check") else "",
            )
            if x
        )
        for c in causes
    )
    blocks: list[Block] = [Paragraph("Likely causes, most likely first", kind="strong")]
    blocks += [Paragraph(note) for note in notes]
    if items:
        blocks.append(Bullets(items))
    return blocks


def _plots(attempt: dict) -> list[Block]:
    """The soak's readings with its fit, then each waveform and its close view of the first edge."""
    blocks: list[Block] = []
    soak = soak_trace(attempt)
    if soak is not None:
        blocks.append(
            Figure(
                soak,
                f"{soak.t.size} readings of the heatsink temperature; dashed: the first-order "
                "fit T(t) = T_final - (T_final - T_0) exp(-t/tau).",
            )
        )
    for wave in attempt.get("waveforms") or []:
        name = _text(wave.get("name"))
        trace = decode_trace(wave)
        if trace is None:
            blocks.append(Paragraph(f"Waveform {name}: cannot be decoded."))
            continue
        net = f", net {wave.get('net')}" if wave.get("net") else ""
        blocks.append(
            Figure(
                trace,
                f"{name}: {int(trace.t.size)} samples{net}; "
                "drawn as the min/max of each pixel column.",
            )
        )
        zoom = zoom_trace(trace)
        if zoom is not None:
            blocks.append(
                Figure(
                    zoom,
                    f"{name}: the first edge, {int(zoom.t.size)} samples around its "
                    "reference-level crossings.",
                )
            )
    return blocks


def _history(step: dict) -> Table:
    rows = [
        (
            _text(a.get("number")),
            fmt_time(a.get("started")),
            _text(a.get("operator") or "-"),
            _text(OUTCOME_WORDS.get(a.get("outcome"), a.get("outcome"))),
            "; ".join(map(str, a.get("notes") or [])),
        )
        for a in step.get("attempts") or []
    ]
    rows += [
        (
            _text(ev.get("kind"), "note"),
            fmt_time(ev.get("at")),
            _text(ev.get("by") or "-"),
            "",
            _text(ev.get("text")),
        )
        for ev in step.get("events") or []
    ]
    head = ("Attempt / event", "When", "Who", "Verdict", "Note")
    return Table(head, tuple(rows), (22, 48, 27, 33, 60))


def _step(step: dict, bench: dict) -> list[Block]:
    blocks: list[Block] = [
        Heading(_text(step.get("title") or step.get("id")), 3, _text(step.get("status")))
    ]
    attempts = step.get("attempts") or []
    if attempts:
        final = attempts[-1]
        blocks.append(
            Paragraph(f"Decided by attempt {_text(final.get('number'))} of {len(attempts)}.")
        )
        blocks += _results(final, bench) + _plots(final)
    else:
        blocks.append(Paragraph("No attempt recorded."))
    history = _history(step)
    if history.rows:
        blocks.append(history)
    for earlier in attempts[:-1]:  # superseded tries stay in the record as evidence
        word = OUTCOME_WORDS.get(earlier.get("outcome"), earlier.get("outcome"))
        title = Heading(f"Earlier attempt {_text(earlier.get('number'))}: {_text(word)}", 4)
        blocks.append(Aside((title, *_results(earlier, bench), *_plots(earlier))))
    return blocks


def _stage(stage: dict, bench: dict) -> Section:
    # the stage's and its steps' cautions, each said once, naming the step it comes from
    blocks: list[Block] = [
        Paragraph(text, "caution", None if where == _text(stage.get("title") or stage.get("id"))
                  else where)
        for where, text in step_cautions(stage)
    ]  # fmt: skip
    for step in stage.get("steps") or []:
        blocks += _step(step, bench)
    title = f"Stage: {_text(stage.get('title') or stage.get('id'))}"
    return Section(f"stage-{_text(stage.get('id'))}", title, tuple(blocks), stage=True)


def _identity(record: dict, content: dict, digest: str) -> Section:
    log = content.get("log") or {}
    pairs = (
        ("Schema", _text(record.get("schema"))),
        ("Content digest (SHA-256 of the canonical JSON)", digest),
        ("Log chain head", _text(log.get("chain_head"), "-")),
        ("Log entries", _text(log.get("entries"), "-")),
    )
    design = tuple(tuple(row) for row in design_rows(content.get("board", {})))
    blocks = (
        Table(None, pairs, (70, 120)),
        Heading("Design values of the board", 3),
        Table(("Design value", "Value"), design, (95, 95)),
    )
    return Section("identity", "Identity of this record", blocks)


def build_document(record: dict) -> Document:
    """The ``Document`` of an exported record (``{"schema", "content", "seal", "signatures"}``)."""
    content = record["content"]
    digest = _text(record.get("seal", {}).get("content_sha256"))
    session, board = content.get("session", {}), content.get("board", {})
    serial, session_id = _text(session.get("serial")), _text(session.get("id"))
    board_text = f"{_text(board.get('name'), '-')} rev {_text(board.get('revision'), '-')}"
    times = tuple(
        str(stamp["utc"])
        for stamp in (session.get("ended"), session.get("started"))
        if isinstance(stamp, dict) and stamp.get("utc")
    )
    sections = (
        _summary(record, digest),
        _cautions(content),
        _bench(content),
        _comparison(content),
        *(_stage(s, content.get("bench") or {}) for s in content.get("stages", [])),
        _identity(record, content, digest),
    )
    rehearsal = is_rehearsal(content)
    kind = "Rehearsal record" if rehearsal else "Bring-up record"
    return Document(
        title=f"{kind} {serial}, {_text(board.get('name'))}",
        rehearsal=REHEARSAL_MARK if rehearsal else None,
        running_head=f"{'REHEARSAL  |  ' if rehearsal else ''}Bring-up record  |  serial {serial or '-'}  |  {board_text}  |  "
        f"session {session_id or '-'}",
        digest=digest,
        serial=serial,
        session=session_id,
        operators=tuple(map(str, session.get("operators") or [])),
        times_utc=times,
        sections=sections,
        closing=f"Record {serial} / session {session_id} / digest {digest}. "
        "Check it with: bringup verify RECORD.json --key PUBLIC_KEY",
    )
