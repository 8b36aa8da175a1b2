"""The lab database: every bench's log in one PostgreSQL database, append-only.

``bringup push --lab`` copies a bench's sessions there (``push.py``); ``sessions``, ``export``,
``verify`` and ``batch`` read them back with ``--lab`` (``reading.py``) through the log's own
reader. Which database and which credentials: ``config.py`` (never from the command line's
history). psycopg 3 is imported only in this package, and only when a command asks for the lab.

Public API::

    from bringup.lab import LabReading, LabTarget, push_log, resolve_lab
"""

from bringup.lab.config import LabTarget, resolve_lab
from bringup.lab.push import PushReport, push_log
from bringup.lab.reading import LabReading, LabSession

__all__ = ["LabReading", "LabSession", "LabTarget", "PushReport", "push_log", "resolve_lab"]
