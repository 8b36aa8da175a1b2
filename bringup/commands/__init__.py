"""One module per ``bringup`` sub-command.

Each module defines ``add_parser(subparsers)`` and ``run(args) -> int``. Module top levels
import only the standard library (and ``bringup.errors``): heavy packages (textual, pyvisa,
scipy) are imported inside ``run`` so that ``bringup --help`` and the ``analyze``/``calc``
commands start fast. ``tests/unit/test_startup.py`` checks this.
"""

# Order here is the order in ``bringup --help``.
COMMANDS = (
    "demo",
    "open",
    "run",
    "resume",
    "sessions",
    "batch",
    "analyze",
    "calc",
    "sim",
    "instruments",
    "capture",
    "export",
    "keygen",
    "sign",
    "verify",
    "push",
)
