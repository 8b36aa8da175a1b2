"""Board and checklist files: typed, validated models of what the user writes in TOML.

``load_board`` reads a board file (design values, targets); ``load_checklist`` reads a checklist
(stages, steps). Every problem is one ``ConfigError`` naming file, key and line.
"""

from bringup.checklist.board import Board, Target, demo_board_path, load_board

__all__ = ["Board", "Target", "demo_board_path", "load_board"]
