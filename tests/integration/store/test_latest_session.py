"""``--last``: the session started last, named without copying its id (sessions, sign, export)."""

from __future__ import annotations

import json

import pytest
from store_samples import BENCH, BOARD, CHECKLIST

from bringup.cli import main
from bringup.errors import StoreError


def _start(log, serial: str) -> str:
    return log.create_session(
        board=BOARD, checklist=CHECKLIST, bench=BENCH, serial=serial, operator="Ana Ortiz"
    )


def test_latest_is_the_session_started_last_not_the_last_touched(log) -> None:
    first = _start(log, "DHS24-0001")
    second = _start(log, "DHS24-0002")
    # activity on the older session does not make it the latest one
    log.record_event(first, kind="note", operator="Ana Ortiz", reason="later note on the first")
    assert log.sessions()[0].id == first  # most recent activity first
    assert log.latest_session() == second


def test_an_empty_log_names_no_latest_session(log) -> None:
    with pytest.raises(StoreError, match="no sessions in this log"):
        log.latest_session()


def test_sessions_last_lists_only_that_session(log, db_path, capsys) -> None:
    _start(log, "DHS24-0001")
    second = _start(log, "DHS24-0002")
    log.close()
    assert main(["sessions", "--last", "--json", "--db", str(db_path)]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["id"] for r in rows] == [second]


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["export", "--format", "json"], "one of the arguments SESSION --last is required"),
        (["export", "abc", "--last"], "argument --last: not allowed with argument SESSION"),
    ],
)
def test_session_and_last_are_one_or_the_other(argv, message, capsys) -> None:
    with pytest.raises(SystemExit) as exit_:
        main(argv)
    assert exit_.value.code == 2
    assert message in capsys.readouterr().err
