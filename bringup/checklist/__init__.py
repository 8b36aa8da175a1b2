"""Board and checklist files: typed, validated models of what the user writes in TOML.

``load_board`` reads a board file (design values, targets); ``load_checklist`` reads a checklist
(stages, steps); ``check_against_board`` checks that every target a step names is defined.
Every problem is one ``ConfigError`` naming file, key and line.
"""

from bringup.checklist.board import Board, Target, demo_board_path, load_board
from bringup.checklist.load import check_against_board, load_checklist, standard_checklist_path
from bringup.checklist.model import Checklist, Stage, Step

__all__ = [
    "Board",
    "Checklist",
    "Stage",
    "Step",
    "Target",
    "check_against_board",
    "demo_board_path",
    "load_board",
    "load_checklist",
    "standard_checklist_path",
]
