"""Board files: what the user writes about one board (identity, design values, targets).

``board_file`` reads and validates a board file (``checklists/demo-board.toml`` is the shipped
example) into a typed ``Board``; every problem is one ``ConfigError`` naming file, key and line.
Checklists (``bringup.checklist``) name the targets a board defines, so checklists import boards,
never the other way round.
"""

from bringup.boards.board_file import Board, Target, demo_board_path, load_board

__all__ = ["Board", "Target", "demo_board_path", "load_board"]
