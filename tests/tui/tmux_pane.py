"""A real terminal for the notebook's tests: one detached tmux session on its own server socket,
keys sent in, the screen read back with ``capture-pane``; and the keys line at its foot, read
the way a person reads it."""

from __future__ import annotations

import re
import shutil
import subprocess
import time
import uuid
from pathlib import Path

__all__ = ["TMUX", "Pane", "foot_keys"]

TMUX = shutil.which("tmux") or ("/usr/bin/tmux" if Path("/usr/bin/tmux").exists() else None)


class Pane:
    """One detached tmux session on its own server socket."""

    def __init__(self, command: str, env: dict[str, str], size: tuple[int, int] = (130, 40)):
        self.socket = f"bringup-test-{uuid.uuid4().hex[:8]}"
        self.env = env
        self._tmux("new-session", "-d", "-s", "smoke", "-x", str(size[0]), "-y", str(size[1]),
                   command)  # fmt: skip

    def _tmux(self, *args: str) -> str:
        out = subprocess.run([TMUX, "-L", self.socket, *args], capture_output=True, text=True,
                             env=self.env, timeout=10, check=True)  # fmt: skip
        return out.stdout

    def keys(self, *keys: str) -> None:
        self._tmux("send-keys", "-t", "smoke", *keys)

    def screen(self, joined: bool = False) -> str:
        """What the pane shows; ``joined``: lines the terminal wrapped joined back."""
        return self._tmux("capture-pane", "-p", *(["-J"] if joined else []), "-t", "smoke")

    def wait_for(self, *texts: str, timeout: float = 30.0) -> str:
        """The screen once every one of ``texts`` is on it."""
        return self.wait_until(lambda s: all(t in s for t in texts), f"{texts!r}", timeout)

    def wait_until(self, predicate, what: str, timeout: float = 30.0) -> str:
        """The screen once ``predicate(screen)`` holds."""
        deadline = time.monotonic() + timeout
        while True:
            screen = self.screen()
            if predicate(screen):
                return screen
            if time.monotonic() > deadline:
                raise AssertionError(f"{what} never came; the screen:\n{screen}")
            time.sleep(0.1)  # polling the terminal, not a fixed wait for the app

    def kill(self) -> None:
        subprocess.run([TMUX, "-L", self.socket, "kill-server"], capture_output=True,
                       env=self.env, timeout=10)  # fmt: skip


# one entry of the keys line: a key as Textual shows it ("r", "kj", "1234", "^q", "esc",
# "enter") and what it does, entries two spaces apart
_KEY = r"(?:\^?[a-z0-9]{1,4}|esc|enter)"
_ENTRY = re.compile(rf"^(?P<key>{_KEY}) (?P<what>[^:]+)$")


def foot_keys(screen: str) -> dict[str, str]:
    """The keys the foot of ``screen`` shows, key -> what it does: the bottom lines made only
    of key entries (the keys line wraps onto two or more lines on a narrow terminal)."""
    found: dict[str, str] = {}
    for line in reversed(screen.rstrip("\n").split("\n")):
        entries = [e for e in re.split(r"\s{2,}", line.strip()) if e]
        parsed = [_ENTRY.match(e) for e in entries]
        if not entries or not all(parsed):
            if found:
                break
            continue  # blank lines under a prompt's box
        for m in parsed:
            found.setdefault(m["key"], m["what"])
    return found
