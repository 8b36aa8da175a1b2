"""Which lab database, and with what credentials: never from the command line's history.

``--lab VALUE`` names the lab database in one of three ways:

- a PostgreSQL URL (``postgresql://bench3@labserver/bringup``) or libpq keyword string
  (``host=labserver dbname=bringup user=bench3``) *without a password*: a password there is
  refused (it would stay in the shell's history and show in the process list); libpq finds it
  in ``PGPASSWORD``, ``PGPASSFILE`` or ``~/.pgpass`` (libpq's own rules);
- ``env``: the URL in ``$BRINGUP_LAB_URL`` (a password is allowed there: the environment is
  not the history);
- a name from the lab config file (``$BRINGUP_LAB_CONFIG``, else ``lab.toml`` in the user's
  config folder, e.g. ``~/.config/bringup/lab.toml``)::

      [labs.main]
      url = "postgresql://bench3@labserver/bringup"
      password = "..."          # optional
      bench = "bench-3"         # optional: this bench's name in the lab (``push``)

  The file must be readable by its owner only (``chmod 600``): a looser one is refused in one
  line naming it, whether or not it holds a password.

Nothing here writes the URL or the password anywhere: the log and the record never see them,
and :func:`shown` is the form every message uses (user, host, port and database only).
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass
from pathlib import Path

from bringup.errors import InputError

__all__ = ["LabTarget", "resolve_lab", "config_path", "shown"]

_ENV_URL = "BRINGUP_LAB_URL"
_ENV_CONFIG = "BRINGUP_LAB_CONFIG"


@dataclass(frozen=True)
class LabTarget:
    """A lab database to connect to: ``conninfo`` (for libpq; may hold a password from the
    environment or the config file, so never print it), ``label`` (what messages show) and
    ``bench`` (this bench's name from the config file, if it gives one)."""

    conninfo: str
    label: str
    bench: str | None = None


def config_path() -> Path:
    """The lab config file: ``$BRINGUP_LAB_CONFIG``, else ``lab.toml`` in the user's config
    folder (platformdirs)."""
    given = os.environ.get(_ENV_CONFIG)
    if given:
        return Path(given).expanduser()
    import platformdirs

    return Path(platformdirs.user_config_dir("bringup", appauthor=False)) / "lab.toml"


def _parse(conninfo: str, where: str) -> dict[str, str]:
    from psycopg.conninfo import conninfo_to_dict

    try:
        return {k: str(v) for k, v in conninfo_to_dict(conninfo).items() if v is not None}
    except Exception as error:  # psycopg raises ProgrammingError with libpq's text
        text = str(error).strip().splitlines()[0] if str(error).strip() else "not understood"
        raise InputError(f"{where}: not a PostgreSQL URL ({text})") from None


def shown(conninfo: str) -> str:
    """The lab as messages name it: ``postgresql://user@host:port/dbname``, no password."""
    try:
        parts = _parse(conninfo, "lab")
    except InputError:
        return "the lab database"
    user = f"{parts['user']}@" if parts.get("user") else ""
    host = parts.get("host") or "localhost"
    port = f":{parts['port']}" if parts.get("port") else ""
    return f"postgresql://{user}{host}{port}/{parts.get('dbname', '')}"


def _looks_like_conninfo(value: str) -> bool:
    return "://" in value or "=" in value


def resolve_lab(value: str | None, *, option: str = "--lab") -> LabTarget:
    """The lab named by ``--lab VALUE`` (see the module docstring); ``InputError`` in one line
    for a password on the command line, a URL libpq cannot read, an unknown name or a config
    file others can read."""
    value = (value or "").strip()
    if not value:
        raise InputError(f"{option}: give a PostgreSQL URL (no password), 'env' or a lab name")
    if value == "env":
        url = os.environ.get(_ENV_URL, "").strip()
        if not url:
            raise InputError(f"{option} env: ${_ENV_URL} is not set")
        _parse(url, f"${_ENV_URL}")
        return LabTarget(url, shown(url))
    if _looks_like_conninfo(value):
        parts = _parse(value, option)
        if "password" in parts:
            raise InputError(
                f"{option}: the URL carries a password, which would stay in your shell history: "
                f"put it in PGPASSWORD, ~/.pgpass or the lab config file ({config_path()}, "
                "chmod 600) and give the URL without it"
            )
        return LabTarget(value, shown(value))
    return _from_config(value, option)


def _checked_config(path: Path) -> dict:
    """The config file parsed, after refusing one that others can read or write."""
    from bringup.tomlfile import read_toml

    try:
        mode = path.stat().st_mode
    except FileNotFoundError:
        raise InputError(
            f"--lab: no lab config file at {path} (a lab name needs one; or give a URL)"
        ) from None
    except OSError as error:
        raise InputError(f"{path}: cannot read the lab config ({error.strerror})") from None
    if mode & (stat.S_IRWXG | stat.S_IRWXO):
        raise InputError(
            f"{path}: the lab config is open to others (mode {stat.S_IMODE(mode):04o}); it may "
            f"hold a password: run `chmod 600 {path}`"
        )
    return read_toml(path).data


def _from_config(name: str, option: str) -> LabTarget:
    from psycopg.conninfo import make_conninfo

    path = config_path()
    labs = _checked_config(path).get("labs")
    entry = labs.get(name) if isinstance(labs, dict) else None
    if not isinstance(entry, dict):
        known = ", ".join(sorted(labs)) if isinstance(labs, dict) and labs else "none"
        raise InputError(f"{option} {name}: no [labs.{name}] in {path} (labs there: {known})")
    url = entry.get("url")
    if not isinstance(url, str) or not url.strip():
        raise InputError(f"{path}: labs.{name}.url: a PostgreSQL URL is required")
    _parse(url, f"{path}: labs.{name}.url")
    password = entry.get("password")
    if password is not None and not isinstance(password, str):
        raise InputError(f"{path}: labs.{name}.password: must be text")
    conninfo = make_conninfo(url, password=password) if password else url
    bench = entry.get("bench")
    if bench is not None and (not isinstance(bench, str) or not bench.strip()):
        raise InputError(f"{path}: labs.{name}.bench: must be a name")
    return LabTarget(conninfo, f"{name} ({shown(url)})", bench.strip() if bench else None)
