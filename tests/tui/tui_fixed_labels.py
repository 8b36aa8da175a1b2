"""A launcher whose sessions show fixed ids and times, for snapshots only.

The log gives every session a random id and every attempt the time it ran: both are right for
the bench and useless in a screenshot baseline. Everything else on screen (the runner's states,
metrics, verdicts, waveforms from a seeded simulated bench) is the real thing.
"""

from __future__ import annotations

import dataclasses

from bringup.tui.launch import Launcher
from bringup.tui.link import SessionLink
from bringup.tui.views import AttemptView, SessionRow

FIXED_ID = "261201-snap"
FIXED_WHEN = "2026-12-01 09:30:00"


class FixedLink(SessionLink):
    """``SessionLink`` with a fixed session id and attempt times on screen."""

    @property
    def session_id(self) -> str:
        return FIXED_ID

    def attempts(self, step_id: str) -> tuple[AttemptView, ...]:
        return tuple(dataclasses.replace(a, when=FIXED_WHEN) for a in super().attempts(step_id))


class FixedLauncher(Launcher):
    """``Launcher`` whose links are ``FixedLink`` and whose session list shows fixed text."""

    def new_session(self, **values) -> SessionLink:
        link = super().new_session(**values)
        return FixedLink(link.runner, link.bench_text)

    def resume(self, session_id: str) -> SessionLink:
        link = super().resume(session_id)
        return FixedLink(link.runner, link.bench_text)

    def unfinished_sessions(self) -> tuple[SessionRow, ...]:
        return tuple(
            dataclasses.replace(row, id=f"{FIXED_ID}{i}", last_activity=FIXED_WHEN)
            for i, row in enumerate(super().unfinished_sessions())
        )
