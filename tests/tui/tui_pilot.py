"""Driving the notebook through its Pilot: wait on conditions, answer prompts like an operator."""

from __future__ import annotations

import asyncio
import functools
import html
import re
import time
from collections.abc import Callable

from bringup.tui.screens.prompts import ConfirmPrompt, EnergisePrompt, ReasonPrompt
from bringup.tui.screens.session import SessionScreen

__all__ = [
    "wait_until",
    "take_step",
    "session_screen",
    "status_text",
    "sync",
    "wait_for_session",
    "screen_lines",
]


def sync(test):
    """Run an ``async def`` test with ``asyncio.run`` (no async plugin for pytest here)."""

    @functools.wraps(test)
    def run(*args, **kwargs):
        return asyncio.run(test(*args, **kwargs))

    return run


async def wait_until(
    pilot, predicate: Callable[[], bool], timeout: float = 30.0, what: str = "condition"
) -> None:
    """Let the app run until ``predicate()`` is true; fail after ``timeout`` seconds."""
    deadline = time.monotonic() + timeout
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out after {timeout} s waiting for {what}")
        await pilot.pause(0.02)


def session_screen(app) -> SessionScreen:
    """The session screen (it may be under a prompt)."""
    for screen in reversed(app.screen_stack):
        if isinstance(screen, SessionScreen):
            return screen
    raise AssertionError(f"no session screen in {app.screen_stack!r}")


async def wait_for_session(pilot, timeout: float = 30.0) -> SessionScreen:
    """Wait until the session screen is up and shows a step; return it."""
    app = pilot.app

    def ready() -> bool:
        screen = app.screen
        return isinstance(screen, SessionScreen) and screen.is_mounted and bool(screen.viewed)

    await wait_until(pilot, ready, timeout, what="the session screen")
    await pilot.pause()
    return app.screen


def status_text(app) -> str:
    """The status line's text on the current (or the session) screen."""
    screen = session_screen(app)
    return str(screen.query_one("#status").render())


async def answer_prompts(pilot, reading: str | None = None, timeout: float = 30.0) -> list[str]:
    """Answer every prompt the step puts up, the way an operator would, including those it
    puts up while it runs (a meter reading once the board is powered); names of prompts seen."""
    app = pilot.app
    seen: list[str] = []
    screen = session_screen(app)
    while True:
        await wait_until(
            pilot,
            lambda: (
                isinstance(app.screen, (ConfirmPrompt, EnergisePrompt, ReasonPrompt))
                or (
                    screen.running is None
                    and (
                        not list(app.workers)  # nothing pending: refused or done
                        or all(w.group != "prompts" or w.is_finished for w in app.workers)
                    )
                )
            ),
            timeout=timeout,
            what="a prompt or the step to end",
        )
        top = app.screen
        if isinstance(top, ConfirmPrompt | EnergisePrompt):
            seen.append(type(top).__name__)
            await pilot.press("y")
            await wait_until(pilot, lambda t=top: app.screen is not t, what="prompt to close")
        elif isinstance(top, ReasonPrompt):
            seen.append("ReadingPrompt")
            if reading:
                await pilot.press(*reading)
            await pilot.press("enter")
            await wait_until(pilot, lambda t=top: app.screen is not t, what="prompt to close")
        else:
            return seen


async def take_step(pilot, reading: str | None = None, timeout: float = 30.0) -> list[str]:
    """Press r on the viewed step, answer its prompts, wait for its attempt to be judged."""
    app = pilot.app
    screen = session_screen(app)
    before = len(screen.link.attempts(screen.viewed))
    step = screen.viewed
    await pilot.press("r")
    seen = await answer_prompts(pilot, reading, timeout)
    await wait_until(
        pilot,
        lambda: screen.running is None and len(screen.link.attempts(step)) > before,
        timeout=timeout,
        what=f"an attempt of {step}",
    )
    await app.workers.wait_for_complete()
    await pilot.pause()
    return seen


_SVG_TEXT = re.compile(
    r'<text[^>]* x="(?P<x>[0-9.]+)"[^>]*clip-path="url\(#terminal-\d+-line-(?P<line>\d+)\)"[^>]*>'
    r"(?P<text>[^<]*)</text>"
)


def screen_lines(app) -> list[str]:
    """What the terminal shows now, one string per row, read from the app's own screenshot
    (the SVG Textual exports): what a person would read, not a widget's state."""
    svg = app.export_screenshot()
    rows: dict[int, dict[int, str]] = {}
    cell = 12.2  # the exporter's character width, pixels
    for m in _SVG_TEXT.finditer(svg):
        text = html.unescape(m["text"]).replace("\xa0", " ").replace("\n", "")
        column = round(float(m["x"]) / cell)
        rows.setdefault(int(m["line"]), {})[column] = text
    lines = []
    for n in range(max(rows, default=-1) + 1):
        line = ""
        for column, text in sorted(rows.get(n, {}).items()):
            line = line.ljust(column) + text
        lines.append(line)
    return lines
