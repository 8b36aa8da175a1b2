"""Run the notebook app with every way out covered: quit key, Ctrl+C, crash, and every
terminating signal (SIGHUP, SIGINT, SIGQUIT, SIGTERM, SIGPIPE: ``bringup.runner.stop_signals``).

Whatever happens, ``app.shutdown()`` (safe state: supply OFF) and ``launcher.close()`` (stop a
simulated bench the launcher started) run before the process leaves.
"""

from __future__ import annotations

import os
import sys
import threading
import time
from pathlib import Path
from typing import Any

__all__ = ["run_app"]


def run_app(launcher: Any, *, open_new: dict | None = None, resume: Any = None) -> int:
    """Run the app on the terminal; returns the exit status (0 normal, 2 after a fault)."""
    from bringup.runner.stop_signals import SignalGuard, SignalStop
    from bringup.tui.app import BringupApp

    app = BringupApp(launcher, open_new=open_new, resume=resume)

    def leave(stop: SignalStop) -> None:
        # a closed terminal, a kill, a closed pipe: the supply off at once and the signal
        # named in the session's log (runner.abort), then out through the app so that the
        # rest of the safe state runs
        link = app.link
        if link is not None:
            link.runner.abort(stop.reason)
        app.call_later(app.exit, stop.exit_status)
        threading.Thread(target=_last_resort, args=(app, launcher, stop.exit_status),
                         name="bringup-last-resort", daemon=True).start()  # fmt: skip

    try:
        with SignalGuard(leave, raise_stop=False):
            status = app.run()
    except KeyboardInterrupt:
        status = 130
    finally:
        try:
            app.shutdown()
        finally:
            launcher.close()
    if app.crash_message:
        where = _keep_detail(launcher, app.crash_detail)
        _say(f"bringup: error: {app.crash_message} (the supply was switched off){where}")
        _say(app.carry_on())
        return 2
    _say(app.carry_on())  # every way out says how to carry on
    return int(status or 0)


#: Seconds the notebook may take to close after a signal before it is ended without Textual.
LAST_RESORT_S = 10.0


def _last_resort(app: Any, launcher: Any, status: int) -> None:
    """After a signal the supply is already OFF (confirmed) and the abort logged; the app is
    asked to exit. Textual can hang closing a terminal that is gone (SIGHUP: its writer thread
    stops on the lost terminal and the driver waits for it forever), so if the process is still
    here after ``LAST_RESORT_S`` it closes the session (idempotent: supply OFF, instruments and
    log closed) and leaves with the signal's status. A step that had not finished is found
    interrupted, and logged so, when the bench is next opened."""
    time.sleep(LAST_RESORT_S)
    try:
        app.shutdown()
    finally:
        try:
            launcher.close()
        finally:
            os._exit(status)


def _say(line: str) -> None:
    """One line on stderr; a terminal that is gone (SIGHUP: closed, link lost) is no error."""
    try:
        print(line, file=sys.stderr, flush=True)
    except (OSError, ValueError):
        pass


def _keep_detail(launcher: Any, detail: str) -> str:
    """Write the traceback beside the log for a bug report; '' if it could not be written."""
    try:
        folder = Path(launcher.db_path).parent
        path = folder / "bringup-fault.txt"
        path.write_text(detail)
    except (OSError, TypeError, AttributeError):
        return ""
    return f"; details in {path}"
