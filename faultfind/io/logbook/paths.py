"""Where the logbook lives: the default file of each platform, ``--logbook``, the variable."""

from __future__ import annotations

import os
import sys
from pathlib import Path

from faultfind.errors import LogbookError

__all__ = ["ENV_VAR", "default_logbook_path", "resolve_logbook_path"]

#: Environment variable naming the logbook file (cli.md).
ENV_VAR = "FAULTFIND_LOGBOOK"
_FILE_NAME = "logbook.sqlite"


def default_logbook_path(environ=None, platform=None, home=None) -> Path:
    """The logbook file faultfind uses when none is named.

    Parameters
    ----------
    environ : mapping, optional
        Environment variables (default ``os.environ``).
    platform : str, optional
        ``sys.platform`` value (default: this machine's).
    home : str or os.PathLike, optional
        The user's home folder (default ``Path.home()``).

    Returns
    -------
    pathlib.Path
        ``$FAULTFIND_LOGBOOK`` when set and not empty; else
        ``<data folder>/faultfind/logbook.sqlite`` where the data folder is
        ``%LOCALAPPDATA%`` (else ``~/AppData/Local``) on Windows,
        ``~/Library/Application Support`` on macOS, and ``$XDG_DATA_HOME``
        when it is an absolute path, else ``~/.local/share``, elsewhere (XDG
        Base Directory Specification).
    """
    env = os.environ if environ is None else environ
    platform = sys.platform if platform is None else str(platform)
    named = env.get(ENV_VAR, "")
    if named.strip():
        return Path(os.path.expanduser(named))
    home = Path.home() if home is None else Path(home)
    if platform.startswith("win"):
        local = env.get("LOCALAPPDATA", "")
        base = Path(local) if local else home / "AppData" / "Local"
    elif platform == "darwin":
        base = home / "Library" / "Application Support"
    else:
        xdg = env.get("XDG_DATA_HOME", "")
        base = Path(xdg) if xdg and os.path.isabs(xdg) else home / ".local" / "share"
    return base / "faultfind" / _FILE_NAME


def resolve_logbook_path(path=None, environ=None) -> Path:
    """``path`` when given (``--logbook``), else :func:`default_logbook_path`.

    Raises
    ------
    LogbookError
        ``path`` is neither None, a str nor a path-like object, or is empty.
    """
    if path is None:
        return default_logbook_path(environ)
    if not isinstance(path, (str, os.PathLike)) or not os.fspath(path):
        raise LogbookError(f"the logbook path must be a file name, got {path!r}", key="logbook")
    return Path(os.path.expanduser(os.fspath(path)))
