"""Checklist files: typed, validated models of the stages and steps the user writes in TOML.

``load_checklist`` reads a checklist (stages, steps); ``check_against_board`` checks that every
target a step names is defined by the board (board files live in ``bringup.boards``).
``catalogue`` lists the analyses a step may name. Every problem is one ``ConfigError`` naming
file, key and line.
"""

from bringup.checklist.load import check_against_board, load_checklist, standard_checklist_path
from bringup.checklist.model import Checklist, Stage, Step

__all__ = [
    "Checklist",
    "Stage",
    "Step",
    "check_against_board",
    "load_checklist",
    "standard_checklist_path",
]
