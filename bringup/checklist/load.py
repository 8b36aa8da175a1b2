"""Load and validate a checklist file (TOML) into ``bringup.checklist.model`` types.

Format (``checklists/high-side-bootstrap.toml`` is the shipped standard checklist)::

    schema = 1
    [checklist]                      id, title (or name), version, description
    [stages.ID]                      title, purpose          (stages run in file order)
    [stages.ID.steps.KEY]            title, instructions, analysis (required);
                                     cautions, confirm, reading, pwm, supply, targets, report,
                                     gate
    [stages.ID.steps.KEY.scope]      points, duration, pretrigger, trigger = {net, level, slope}
    [stages.ID.steps.KEY.scope.nets] NET = {range, offset, coupling, bandwidth_limit, probe}
    [stages.ID.steps.KEY.soak]       duration, interval, min_duration

``gate = true`` marks a step as a safety gate (the first-power ramp and the rail checks of the
standard checklist): it cannot be skipped, only waived after it failed (by someone other than the
operator), and every later energising prompt names each earlier gate that was waived or has not
passed. Default ``false``.

Quantities are strings in engineering notation or ``"design.KEY"`` / ``"1.5 * design.KEY"``.
Each problem is one ``ConfigError`` naming the file, the key and its line.

Settings are range-checked (``check_step_settings``): a PWM duty in (0, 1]; a supply voltage,
current limit and ramp steps above 0 and at most ``MAX_SUPPLY_V`` / ``MAX_CURRENT_LIMIT_A``, no
ramp step above the final voltage, an OVP above the highest voltage set; a soak's
``min_duration`` not longer than its ``duration``. Values written directly are checked on load;
settings that refer to the board's design values are checked once resolved for the board, by
``check_against_board``, before a session is created.
"""

from __future__ import annotations

import re
from pathlib import Path

from bringup.boards.board_file import (
    DESIGN_UNITS,
    HALF_BRIDGE_UNITS,
    Board,
    check_table,
    checklists_dir,
    expect_str,
    read_quantity,
)
from bringup.checklist.catalogue import ANALYSES, CURRENT_NETS, FLOATING_NETS, NETS
from bringup.checklist.model import (
    Checklist,
    NetCapture,
    PwmSetup,
    ReadingSpec,
    ScopeSetup,
    Setting,
    SoakSetup,
    Stage,
    Step,
    SupplySetup,
    Trigger,
)
from bringup.errors import ConfigError
from bringup.tomlfile import TomlDocument, read_toml

__all__ = [
    "CHECKLIST_SCHEMA",
    "load_checklist",
    "standard_checklist_path",
    "check_against_board",
    "check_step_settings",
]

CHECKLIST_SCHEMA = 1
_ID_RE = re.compile(r"^[a-z0-9][a-z0-9-]*$")
_DESIGN_REF_RE = re.compile(r"^\s*(?:([0-9]*\.?[0-9]+)\s*\*\s*)?design\.([A-Za-z0-9_]+)\s*$")

_TOP = {"schema": True, "checklist": True, "stages": True}
_HEAD = {"id": False, "title": False, "name": False, "version": False, "description": False}
_VERSION_RE = re.compile(r"^[0-9A-Za-z][0-9A-Za-z.+-]*$")
_STAGE = {"title": True, "purpose": False, "steps": True}
_STEP = {
    "title": True,
    "instructions": True,
    "analysis": True,
    "cautions": False,
    "confirm": False,
    "reading": False,
    "pwm": False,
    "supply": False,
    "scope": False,
    "soak": False,
    "targets": False,
    "report": False,
    "gate": False,
}
_SCOPE = {"points": True, "duration": True, "pretrigger": False, "trigger": False, "nets": True}
_TRIGGER = {"net": True, "level": True, "slope": False}
_NET = {"range": True, "offset": False, "coupling": False, "bandwidth_limit": False, "probe": False}
_SUPPLY = {"voltage": True, "current_limit": True, "ramp": False, "dwell": False, "ovp": False}
_PWM = {"enabled": True, "duty": False}
_SOAK = {"duration": True, "interval": True, "min_duration": False}
_READING = {"prompt": True, "unit": True, "metric": True, "net": True}
_PROBES = ("single-ended", "differential", "math", "current")
#: Record lengths the simulated and real scopes accept (points).
MIN_POINTS, MAX_POINTS = 1000, 20_000_000
#: Sane bounds of a step's supply settings (V, A) and durations (s): far beyond a bench supply
#: for this kind of board, small enough that nothing downstream overflows (common practice).
MAX_SUPPLY_V = 2000.0
MAX_CURRENT_LIMIT_A = 1000.0
MAX_DWELL_S = 3600.0
MAX_SOAK_S = 7 * 86400.0


def standard_checklist_path() -> Path:
    """The shipped standard checklist for a high-side N-channel switch with bootstrap drive."""
    return checklists_dir() / "high-side-bootstrap.toml"


def _setting(doc: TomlDocument, keys: tuple[str, ...], value: object, unit: str) -> Setting:
    if isinstance(value, str):
        ref = _DESIGN_REF_RE.match(value)
        if ref:
            factor, key = ref.groups()
            units = DESIGN_UNITS | HALF_BRIDGE_UNITS
            if key not in units:
                raise doc.error(keys, f"unknown design value {key!r}")
            if units[key] != unit:
                raise doc.error(keys, f"design.{key} is in {units[key] or 'ratio'}, not {unit}")
            return Setting(design_key=key, factor=float(factor) if factor else 1.0)
    return Setting(value=read_quantity(doc, keys, value, unit))


def _bool(doc: TomlDocument, keys: tuple[str, ...], value: object) -> bool:
    if not isinstance(value, bool):
        raise doc.error(keys, "must be true or false")
    return value


def _choice(doc: TomlDocument, keys: tuple[str, ...], value: object, choices) -> str:
    if value not in choices:
        raise doc.error(keys, f"must be one of {', '.join(choices)}, got {value!r}")
    return str(value)


def _str_list(doc: TomlDocument, keys: tuple[str, ...], value: object) -> tuple[str, ...]:
    if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
        raise doc.error(keys, "must be a list of non-empty strings")
    return tuple(value)


def _scope(doc: TomlDocument, keys: tuple[str, ...], raw: object) -> ScopeSetup:
    table = check_table(doc, keys, raw, _SCOPE)
    points = table["points"]
    if not isinstance(points, int) or isinstance(points, bool):
        raise doc.error((*keys, "points"), "must be an integer number of points")
    if not MIN_POINTS <= points <= MAX_POINTS:
        raise doc.error((*keys, "points"), f"must lie between {MIN_POINTS} and {MAX_POINTS}")
    duration = read_quantity(doc, (*keys, "duration"), table["duration"], "s")
    if duration <= 0:
        raise doc.error((*keys, "duration"), "must be positive")
    pre = read_quantity(doc, (*keys, "pretrigger"), table.get("pretrigger", 0), "s")
    if not 0 <= pre < duration:
        raise doc.error((*keys, "pretrigger"), "must lie between 0 and the duration")
    trigger = None
    if "trigger" in table:
        tkeys = (*keys, "trigger")
        t = check_table(doc, tkeys, table["trigger"], _TRIGGER)
        trigger = Trigger(
            _choice(doc, (*tkeys, "net"), t["net"], NETS),
            _setting(doc, (*tkeys, "level"), t["level"], "V"),
            _choice(doc, (*tkeys, "slope"), t.get("slope", "positive"), ("positive", "negative")),
        )
    nkeys = (*keys, "nets")
    nets = table["nets"]
    if not isinstance(nets, dict) or not nets:
        raise doc.error(nkeys, "must name at least one net")
    captures = []
    for net, spec in nets.items():
        k = (*nkeys, net)
        if net not in NETS:
            raise doc.error(k, f"unknown net (expected one of: {', '.join(NETS)})")
        n = check_table(doc, k, spec, _NET)
        unit = "A" if net in CURRENT_NETS else "V"  # a current probe's screen is in amperes
        span = _setting(doc, (*k, "range"), n["range"], unit)
        if span.design_key is None and span.value <= 0:  # type: ignore[operator]
            raise doc.error((*k, "range"), "must be positive")
        probe = _choice(doc, (*k, "probe"), n.get("probe", "single-ended"), _PROBES)
        if probe == "single-ended" and net in FLOATING_NETS:
            raise doc.error(
                (*k, "probe"),
                f"{net} floats: a single-ended probe's ground lead would short it "
                '(use probe = "differential" or, for vgs, "math")',
            )
        if (probe == "current") != (net in CURRENT_NETS):
            raise doc.error(
                (*k, "probe"),
                f'{net} is a current: it needs probe = "current"'
                if net in CURRENT_NETS
                else "a current probe measures a current net (i_switch)",
            )
        if probe == "math" and net != "vgs":
            raise doc.error(
                (*k, "probe"), "a math difference is only defined for vgs (gate - switch)"
            )
        captures.append(
            NetCapture(
                net,
                span,
                _setting(doc, (*k, "offset"), n.get("offset", 0), unit),
                _choice(doc, (*k, "coupling"), n.get("coupling", "DC"), ("DC", "AC")),
                _bool(doc, (*k, "bandwidth_limit"), n.get("bandwidth_limit", False)),
                probe,
            )
        )
    if len(captures) > 4:
        raise doc.error(nkeys, "a 4-channel scope acquires at most 4 nets at once")
    if trigger is not None:
        seen = {c.net for c in captures}
        if any(c.probe == "math" for c in captures):
            seen |= {"gate", "switch"}
        if trigger.net not in seen:
            raise doc.error(
                (*keys, "trigger", "net"),
                f"triggers on {trigger.net!r}, which is not acquired (nets: {', '.join(sorted(seen))})",
            )
    return ScopeSetup(points, duration, pre, trigger, tuple(captures))


def _supply(doc: TomlDocument, keys: tuple[str, ...], raw: object) -> SupplySetup:
    table = check_table(doc, keys, raw, _SUPPLY)
    ramp: tuple[Setting, ...] = ()
    if "ramp" in table:
        if not isinstance(table["ramp"], list) or not table["ramp"]:
            raise doc.error((*keys, "ramp"), "must be a list of voltages")
        ramp = tuple(_setting(doc, (*keys, "ramp"), v, "V") for v in table["ramp"])
    dwell = read_quantity(doc, (*keys, "dwell"), table.get("dwell", "50 ms"), "s")
    if not 0 <= dwell <= MAX_DWELL_S:
        raise doc.error((*keys, "dwell"), f"must lie between 0 and {MAX_DWELL_S:g} s")
    ovp = _setting(doc, (*keys, "ovp"), table["ovp"], "V") if "ovp" in table else None
    return SupplySetup(
        _setting(doc, (*keys, "voltage"), table["voltage"], "V"),
        _setting(doc, (*keys, "current_limit"), table["current_limit"], "A"),
        ramp,
        dwell,
        ovp,
    )


def _reading(doc: TomlDocument, keys: tuple[str, ...], analysis: str, raw: object) -> ReadingSpec:
    """A step's ``reading`` table: prompt, unit (the metric's), metric (of the analysis), net."""
    spec = ANALYSES[analysis]
    rk = (*keys, "reading")
    r = check_table(doc, rk, raw, _READING)
    metric = expect_str(doc, (*rk, "metric"), r["metric"])
    if metric not in spec.metrics:
        raise doc.error((*rk, "metric"), f"analysis {analysis!r} yields no metric {metric!r}")
    unit = _choice(doc, (*rk, "unit"), r["unit"], (spec.metrics[metric],))
    return ReadingSpec(
        expect_str(doc, (*rk, "prompt"), r["prompt"]),
        unit,
        metric,
        _choice(doc, (*rk, "net"), r["net"], NETS),
    )


def _pwm(doc: TomlDocument, keys: tuple[str, ...], raw: object) -> PwmSetup:
    """A step's ``pwm`` table: on or off, and the duty cycle (a fraction, or a design key)."""
    p = check_table(doc, (*keys, "pwm"), raw, _PWM)
    duty = _setting(doc, (*keys, "pwm", "duty"), p["duty"], "") if "duty" in p else None
    return PwmSetup(_bool(doc, (*keys, "pwm", "enabled"), p["enabled"]), duty)


def _soak(doc: TomlDocument, sk: tuple[str, ...], raw: object) -> SoakSetup:
    """A step's ``soak`` table: duration, reading interval and least duration (s)."""
    s = check_table(doc, sk, raw, _SOAK)
    duration = read_quantity(doc, (*sk, "duration"), s["duration"], "s")
    interval = read_quantity(doc, (*sk, "interval"), s["interval"], "s")
    if not 0 < duration <= MAX_SOAK_S:
        raise doc.error((*sk, "duration"), f"must be positive and at most {MAX_SOAK_S:g} s")
    if not 0 < interval < duration:
        raise doc.error((*sk, "interval"), "must be positive and shorter than the duration")
    least = read_quantity(doc, (*sk, "min_duration"), s.get("min_duration", duration), "s")
    if not 0 <= least <= duration:
        raise doc.error(
            (*sk, "min_duration"),
            f"{least:g} s must lie between 0 and the soak's duration ({duration:g} s)",
        )
    return SoakSetup(duration, interval, least)


def _check_needs(
    doc: TomlDocument,
    keys: tuple[str, ...],
    analysis: str,
    scope: ScopeSetup | None,
    supply: SupplySetup | None,
    soak: SoakSetup | None,
    reading: ReadingSpec | None,
) -> None:
    """The tables and nets the step's analysis needs are there."""
    spec = ANALYSES[analysis]
    for name, present, needed in (
        ("scope", scope is not None, bool(spec.needs_nets)),
        ("supply.ramp", supply is not None and bool(supply.ramp_v), spec.needs_supply_ramp),
        ("soak", soak is not None, spec.needs_soak),
        ("reading", reading is not None, spec.needs_reading),
    ):
        if needed and not present:
            raise doc.error(keys, f"analysis {analysis!r} needs a {name!r} table")
    if scope is not None:
        have = {c.net for c in scope.captures}
        missing = [n for n in spec.needs_nets if n not in have]
        if missing:
            raise doc.error(
                (*keys, "scope", "nets"), f"analysis {analysis!r} needs net {missing[0]!r}"
            )
    if analysis == "rail-levels" and (scope is None or not scope.captures):
        raise doc.error(keys, "analysis 'rail-levels' needs a 'scope' table")


def _step(doc: TomlDocument, stage_id: str, key: str, raw: object) -> Step:
    keys = ("stages", stage_id, "steps", key)
    if not _ID_RE.match(key):
        raise doc.error(keys, "a step key is lower-case letters, digits and '-'")
    t = check_table(doc, keys, raw, _STEP)
    analysis = t["analysis"]
    if analysis not in ANALYSES:
        known = ", ".join(ANALYSES)
        raise doc.error((*keys, "analysis"), f"unknown analysis {analysis!r} (known: {known})")
    spec = ANALYSES[analysis]
    reading = _reading(doc, keys, analysis, t["reading"]) if "reading" in t else None
    pwm = _pwm(doc, keys, t["pwm"]) if "pwm" in t else None
    supply = _supply(doc, (*keys, "supply"), t["supply"]) if "supply" in t else None
    scope = _scope(doc, (*keys, "scope"), t["scope"]) if "scope" in t else None
    soak = _soak(doc, (*keys, "soak"), t["soak"]) if "soak" in t else None
    _check_needs(doc, keys, analysis, scope, supply, soak, reading)
    targets = _str_list(doc, (*keys, "targets"), t.get("targets", []))
    report = _str_list(doc, (*keys, "report"), t.get("report", []))
    for field_name, ids in (("targets", targets), ("report", report)):
        for metric in ids:
            if metric not in spec.metrics:
                raise doc.error(
                    (*keys, field_name), f"analysis {analysis!r} yields no metric {metric!r}"
                )
    step = Step(
        id=f"{stage_id}.{key}",
        key=key,
        stage_id=stage_id,
        title=expect_str(doc, (*keys, "title"), t["title"]),
        instructions=expect_str(doc, (*keys, "instructions"), t["instructions"]).strip(),
        analysis=analysis,
        cautions=_str_list(doc, (*keys, "cautions"), t.get("cautions", [])),
        confirm=expect_str(doc, (*keys, "confirm"), t["confirm"]) if "confirm" in t else None,
        reading=reading,
        pwm=pwm,
        supply=supply,
        scope=scope,
        soak=soak,
        targets=targets,
        report=report,
        gate=_bool(doc, (*keys, "gate"), t["gate"]) if "gate" in t else False,
    )
    check_step_settings(doc, step, None)
    return step


def _resolved(setting: Setting, design: dict[str, float] | None) -> float | None:
    """The setting's SI value: given directly, or resolved for ``design`` (None without it)."""
    if setting.design_key is None:
        return setting.value
    if design is None:
        return None
    return setting.resolve(design)


def _shown(setting: Setting, value: float, unit: str) -> str:
    from bringup.analysis.quantities import format_quantity

    text = format_quantity(value, unit) if unit else f"{value:g}"
    if setting.design_key is not None:
        text += f" ({setting.describe()} for this board)"
    return text


def check_step_settings(doc: TomlDocument, step: Step, design: dict[str, float] | None) -> None:
    """Range-check ``step``'s PWM and supply settings (see the module docstring).

    With ``design`` None only the values written directly are checked (on load); with a board's
    design values every setting is resolved and checked, and so are the relations between them
    (ramp steps against the final voltage, OVP above the highest one). Raises ``ConfigError``
    naming the checklist file, the key and its line."""
    from bringup.analysis.quantities import format_quantity

    keys = ("stages", step.stage_id, "steps", step.key)
    if step.pwm is not None and step.pwm.duty is not None:
        duty = _resolved(step.pwm.duty, design)
        if duty is not None and not 0.0 < duty <= 1.0:
            raise doc.error(
                (*keys, "pwm", "duty"),
                f"{_shown(step.pwm.duty, duty, '')} is out of range: a duty cycle is a fraction "
                "above 0 and at most 1 (100 %)",
            )
    supply = step.supply
    if supply is None:
        return
    sk = (*keys, "supply")
    checks = [("voltage", supply.voltage_v, "V", MAX_SUPPLY_V),
              ("current_limit", supply.current_limit_a, "A", MAX_CURRENT_LIMIT_A)]  # fmt: skip
    checks += [("ramp", s, "V", MAX_SUPPLY_V) for s in supply.ramp_v]
    if supply.ovp_v is not None:
        checks.append(("ovp", supply.ovp_v, "V", MAX_SUPPLY_V))
    for name, setting, unit, high in checks:
        value = _resolved(setting, design)
        if value is not None and not 0.0 < value <= high:
            raise doc.error(
                (*sk, name),
                f"{_shown(setting, value, unit)} is out of range: must be above 0 and at most "
                f"{format_quantity(high, unit)}",
            )
    final = _resolved(supply.voltage_v, design)
    if final is None:
        return
    top = final
    for setting in supply.ramp_v:
        volts = _resolved(setting, design)
        if volts is None:
            return
        if volts > final * (1 + 1e-12):
            raise doc.error(
                (*sk, "ramp"),
                f"ramp step {_shown(setting, volts, 'V')} is above the final voltage "
                f"{_shown(supply.voltage_v, final, 'V')}",
            )
        top = max(top, volts)
    if supply.ovp_v is not None:
        ovp = _resolved(supply.ovp_v, design)
        if ovp is not None and not ovp > top:
            raise doc.error(
                (*sk, "ovp"),
                f"{_shown(supply.ovp_v, ovp, 'V')} must be above the highest voltage set "
                f"({format_quantity(top, 'V')}): the supply would trip at once",
            )


def checklist_from_document(doc: TomlDocument) -> Checklist:
    """Validate a parsed checklist (see the module docstring for the format)."""
    data = check_table(doc, (), doc.data, _TOP)
    schema = data["schema"]
    if not isinstance(schema, int) or isinstance(schema, bool) or schema < 1:
        raise doc.error(("schema",), f"must be a positive integer, got {schema!r}")
    if schema > CHECKLIST_SCHEMA:
        raise doc.error(
            ("schema",), f"format {schema} is newer than this bringup reads ({CHECKLIST_SCHEMA})"
        )
    head = check_table(doc, ("checklist",), data["checklist"], _HEAD)
    stages_raw = data["stages"]
    if not isinstance(stages_raw, dict) or not stages_raw:
        raise doc.error(("stages",), "must hold at least one [stages.ID] table")
    stages = []
    for sid, raw in stages_raw.items():
        keys = ("stages", sid)
        if not _ID_RE.match(sid):
            raise doc.error(keys, "a stage id is lower-case letters, digits and '-'")
        s = check_table(doc, keys, raw, _STAGE)
        steps_raw = s["steps"]
        if not isinstance(steps_raw, dict) or not steps_raw:
            raise doc.error((*keys, "steps"), "a stage needs at least one step")
        steps = tuple(_step(doc, sid, key, sraw) for key, sraw in steps_raw.items())
        purpose = s.get("purpose", "")
        if not isinstance(purpose, str):
            raise doc.error((*keys, "purpose"), "must be a string")
        stages.append(Stage(sid, expect_str(doc, (*keys, "title"), s["title"]), purpose, steps))
    description = head.get("description", "")
    if not isinstance(description, str):
        raise doc.error(("checklist", "description"), "must be a string")
    return Checklist(
        name=_title(doc, head),
        description=description.strip(),
        stages=tuple(stages),
        path=doc.path,
        text=doc.text,
        source=doc.data,
        id=_head_id(doc, head),
        version=_version(doc, head),
    )


def _title(doc: TomlDocument, head: dict) -> str:
    """``title`` (``name`` is its older spelling): exactly one of them."""
    if "title" in head and "name" in head:
        raise doc.error(("checklist", "name"), "give title or name, not both")
    if "title" not in head and "name" not in head:
        raise doc.error(("checklist",), "missing key 'title'")
    key = "title" if "title" in head else "name"
    return expect_str(doc, ("checklist", key), head[key])


def _head_id(doc: TomlDocument, head: dict) -> str:
    """The checklist's id: lower-case letters, digits and '-' (default: the file's stem)."""
    if "id" not in head:
        return Path(doc.path).stem
    value = head["id"]
    if not isinstance(value, str) or not _ID_RE.match(value):
        raise doc.error(("checklist", "id"), "must be lower-case letters, digits and '-'")
    return value


def _version(doc: TomlDocument, head: dict) -> str | None:
    """The checklist's version, a string such as "1.2" (None when not given)."""
    if "version" not in head:
        return None
    value = head["version"]
    if not isinstance(value, str) or not _VERSION_RE.match(value):
        raise doc.error(
            ("checklist", "version"),
            f"must be a version string such as \"1.2\" (letters, digits, '.', '+', '-'), not {value!r}",
        )
    return value


#: Shipped checklists by the name that addresses them (``--checklist half-bridge-bootstrap``).
SHIPPED_CHECKLISTS = ("high-side-bootstrap", "half-bridge-bootstrap")


def load_checklist(path: str | Path | None = None) -> Checklist:
    """Load and validate a checklist; ``None`` or ``"standard"`` is the shipped standard one,
    and a name of ``SHIPPED_CHECKLISTS`` the shipped file of that name."""
    if path is None or str(path) == "standard":
        path = standard_checklist_path()
    elif str(path) in SHIPPED_CHECKLISTS:
        path = checklists_dir() / f"{path}.toml"
    return checklist_from_document(read_toml(path))


def check_against_board(checklist: Checklist, board: Board) -> None:
    """One validation pass of the checklist against the board, before a session is created:
    every target a step names must be defined by the board file, and every setting resolved for
    the board's design values must be in range (``check_step_settings``).

    Raises a ``ConfigError`` naming the checklist file, the step's key and its line.
    """
    from bringup.tomlfile import parse_toml

    doc = parse_toml(checklist.text, checklist.path)
    for step in checklist.steps():
        for tid in step.targets:
            if tid not in board.targets:
                keys = ("stages", step.stage_id, "steps", step.key, "targets")
                raise ConfigError(
                    checklist.path,
                    ".".join(keys),
                    f"target {tid!r} is not defined in board file {board.path}",
                    doc.line_of(*keys),
                )
        check_step_settings(doc, step, board.design)
