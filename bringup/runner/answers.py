"""Answer files for a headless run: the operator's confirmations and typed readings, in TOML.

Format (``checklists/answers-demo.toml`` is a sample)::

    schema = 1
    [steps."power-rails.first-power"]
    confirmed = true                  # the step's hands and confirmation are done
    [steps."power-rails.logic-meter"]
    confirmed = true
    reading = "3.31 V"                # a value read off a meter, in the step's unit
    hazard_acknowledged = false       # only for a supply above 60 V DC

Unknown steps or keys are refused with the file, key and line, like every other file. Every
typed reading is read on load against the step it answers (a finite quantity in the step's
unit; a step that asks for no reading takes none), so a bad one is refused before a session is
created or anything is powered.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from bringup.analysis.quantities import parse_quantity
from bringup.boards.board_file import check_table
from bringup.checklist.model import Checklist
from bringup.errors import InputError
from bringup.runner.results import StepAnswers
from bringup.tomlfile import read_toml

__all__ = ["AnswerBook", "load_answers"]

_TOP = {"schema": True, "steps": True}
_STEP = {"confirmed": False, "reading": False, "hazard_acknowledged": False}


@dataclass(frozen=True)
class AnswerBook:
    """Answers by step id (``"<stage>.<step>"``); ``path`` is the file they came from."""

    path: Path
    answers: dict[str, StepAnswers]

    def get(self, step_id: str) -> StepAnswers | None:
        """The answers for ``step_id``, or None when the file has none for it."""
        return self.answers.get(step_id)


def load_answers(path: str | Path, checklist: Checklist) -> AnswerBook:
    """Read and validate an answer file against ``checklist``: step ids must exist, and each
    typed reading must read as a finite quantity in the unit of the step it answers."""
    doc = read_toml(path)
    data = check_table(doc, (), doc.data, _TOP)
    if data["schema"] != 1:
        raise doc.error(
            ("schema",), f"this bringup reads answer files of schema 1, not {data['schema']!r}"
        )
    steps = data["steps"]
    if not isinstance(steps, dict):
        raise doc.error(("steps",), 'must be a table of [steps."<stage>.<step>"] tables')
    known = {s.id for s in checklist.steps()}
    answers: dict[str, StepAnswers] = {}
    for step_id, raw in steps.items():
        keys = ("steps", step_id)
        if step_id not in known:
            raise doc.error(keys, f"no step {step_id!r} in checklist {checklist.path.name}")
        table = check_table(doc, keys, raw, _STEP)
        for flag in ("confirmed", "hazard_acknowledged"):
            if flag in table and not isinstance(table[flag], bool):
                raise doc.error((*keys, flag), "must be true or false")
        reading = table.get("reading")
        if reading is not None and not isinstance(reading, str | int | float):
            raise doc.error((*keys, "reading"), 'must be a quantity such as "3.31 V"')
        if reading is not None:
            spec = checklist.step(step_id).reading
            if spec is None:
                raise doc.error((*keys, "reading"), f"step {step_id} asks for no reading")
            try:
                parse_quantity(reading, spec.unit)  # finite, in the step's unit
            except InputError as exc:
                raise doc.error((*keys, "reading"), f"{exc} ({spec.prompt})") from None
        answers[step_id] = StepAnswers(
            confirmed=table.get("confirmed"),
            reading=None if reading is None else str(reading),
            hazard_acknowledged=bool(table.get("hazard_acknowledged", False)),
        )
    return AnswerBook(doc.path, answers)
