"""Board and checklist as logged with a session, and back again on resume.

The snapshot keeps the file's text, so a resumed session is judged against exactly the targets
and steps it started with, even if the files on disk have changed since.
"""

from __future__ import annotations

from bringup.boards.board_file import Board, board_from_document
from bringup.checklist.load import checklist_from_document
from bringup.checklist.model import Checklist
from bringup.tomlfile import parse_toml

__all__ = ["board_snapshot", "checklist_snapshot", "board_from_snapshot", "checklist_from_snapshot"]


def board_snapshot(board: Board) -> dict:
    """The board file's content (its tables), path and text, for the log."""
    return {**board.source, "path": str(board.path), "text": board.text}


def checklist_snapshot(checklist: Checklist) -> dict:
    """The checklist's id, title, version, stages and step ids (for listings), path and text,
    for the log."""
    return {
        "id": checklist.id or checklist.path.stem,
        "name": checklist.name,
        "title": checklist.title,
        "version": checklist.version,
        "stages": [
            {
                "id": s.id,
                "title": s.title,
                "steps": [
                    {"id": st.key, "title": st.title, **({"gate": True} if st.gate else {})}
                    for st in s.steps
                ],
            }
            for s in checklist.stages
        ],
        "path": str(checklist.path),
        "text": checklist.text,
    }


def _text(data: dict, what: str) -> str:
    from bringup.errors import InputError

    text = data.get("text") if isinstance(data, dict) else None
    if not isinstance(text, str):
        raise InputError(f"the session's {what} snapshot holds no file text: it cannot be resumed")
    return text


def board_from_snapshot(data: dict) -> Board:
    """Rebuild (and re-validate) the board from a session's snapshot."""
    return board_from_document(parse_toml(_text(data, "board"), data.get("path", "<logged board>")))


def checklist_from_snapshot(data: dict) -> Checklist:
    """Rebuild (and re-validate) the checklist from a session's snapshot."""
    return checklist_from_document(
        parse_toml(_text(data, "checklist"), data.get("path", "<logged checklist>"))
    )
