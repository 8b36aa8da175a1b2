"""Notes, skips, waivers and going back are written to the log off the interface's thread.

Another process holding the log's write lock (a ``bringup export`` of the same log, a backup
tool) used to freeze every key until SQLite's busy timeout ran out, and the note was then lost
with "locked". Here a plain sqlite3 connection holds the lock (``BEGIN IMMEDIATE``) while a note
is typed: the keys still work, and once the lock is released the note is logged and shown.
"""

from __future__ import annotations

import sqlite3

from tui_pilot import sync, wait_for_session, wait_until

from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher


async def _type(pilot, text: str) -> None:
    await pilot.press(*[{" ": "space"}.get(ch, ch) for ch in text])


@sync
async def test_a_note_waits_for_a_locked_log_without_freezing_the_keys(log_path):
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0120", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        notes = screen.query_one("#notes-list")
        await pilot.press("n")
        await _type(pilot, "probe ground moved")

        holder = sqlite3.connect(log_path, isolation_level=None, timeout=0.1)
        try:
            holder.execute("BEGIN IMMEDIATE")  # the write lock, as another writer holds it
            await pilot.press("enter")
            writers = [w for w in app.workers if w.group == "log"]
            assert writers and not writers[0].is_finished  # the write waits on the lock ...
            await pilot.click("#checklist")  # ... while the mouse and keys are handled
            await pilot.press("2")
            await wait_until(pilot, lambda: screen.query_one("#tabs").active == "tab-trace")
            assert not writers[0].is_finished
            assert "probe ground moved" not in str(notes.render())
        finally:
            holder.execute("COMMIT")
            holder.close()
        await wait_until(pilot, lambda: "probe ground moved" in str(notes.render()), timeout=10)
        assert "Note kept" in str(screen.query_one("#status").render())
        session_id = screen.link.session_id
        await pilot.press("q")
    with SessionLog.open(log_path) as log:
        kept = [(e.kind, e.reason) for e in log.events(session_id) if e.kind == "note"]
    assert kept == [("note", "probe ground moved")]
