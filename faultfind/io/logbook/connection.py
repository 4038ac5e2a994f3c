"""The logbook file's connection: opening, creating, upgrading (io/migrations.py), locking, errors.

:class:`Connection` is the base of :class:`faultfind.io.logbook.Logbook`;
:func:`_locked` serializes a method on the connection and turns SQLite's
errors into :class:`~faultfind.errors.LogbookError`.
"""

from __future__ import annotations

import functools
import math
import os
import sqlite3
import threading
from contextlib import contextmanager
from datetime import datetime
from pathlib import Path

from faultfind import __version__
from faultfind.errors import LogbookError
from faultfind.io import migrations as mig
from faultfind.io.logbook.paths import _FILE_NAME, ENV_VAR, resolve_logbook_path

_SQLITE_MAGIC = b"SQLite format 3\x00"


def _locked(method):
    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        with self._lock:
            if self._conn is None:
                raise LogbookError("the logbook is closed", file=self.path)
            with self._guard():
                return method(self, *args, **kwargs)
    return wrapper


class Connection:
    """The open file of a :class:`~faultfind.io.logbook.Logbook` (its docstring: the rules)."""

    def __init__(self, path, *, create, timeout):
        self.path = resolve_logbook_path(path)
        if isinstance(timeout, bool) or not isinstance(timeout, (int, float)) \
                or not math.isfinite(timeout) or timeout < 0:
            raise LogbookError(f"timeout must be a number of seconds >= 0, got {timeout!r}",
                               key="timeout")
        self.timeout = float(timeout)
        self.upgraded: list[str] = []
        self.backup: Path | None = None
        self._lock = threading.RLock()
        self._conn = None
        self._cache: dict = {}
        self._prepare_file(bool(create))
        try:
            self._conn = sqlite3.connect(str(self.path), timeout=self.timeout,
                                         isolation_level=None, check_same_thread=False)
        except sqlite3.Error as exc:
            raise self._error(exc) from None
        try:
            with self._guard():
                self._open()
        except BaseException:
            self._conn.close()
            self._conn = None
            raise

    def _prepare_file(self, create):
        p = self.path
        if p.is_dir():
            raise LogbookError("is a folder, not a logbook file: name a file, e.g. "
                               f"{p / _FILE_NAME}", file=p)
        if p.exists():
            try:
                with open(p, "rb") as f:
                    head = f.read(100)
            except OSError as exc:
                raise LogbookError(f"cannot read the logbook: {exc.strerror or exc}",
                                   file=p) from None
            if head and (len(head) < 100 or not head.startswith(_SQLITE_MAGIC)):
                raise self._corrupt("it is not an SQLite database")
            return
        if not create:
            raise LogbookError("no logbook here yet: 'faultfind log start' creates one (or "
                               f"name another with --logbook or {ENV_VAR})", file=p)
        try:
            if not p.parent.exists():
                p.parent.mkdir(parents=True, mode=0o700)
            fd = os.open(p, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
            os.close(fd)
        except FileExistsError:
            pass  # another process created it this instant: open it as it is
        except OSError as exc:
            raise LogbookError(f"cannot create the logbook: {exc.strerror or exc}; name a "
                               f"file you may write with --logbook or {ENV_VAR}",
                               file=p) from None

    def _open(self):
        conn = self._conn
        app = mig.application_id(conn)
        version = mig.schema_version(conn)
        tables = [r[0] for r in conn.execute(
            "SELECT name FROM sqlite_master WHERE name NOT LIKE 'sqlite_%'")]
        if app != mig.APPLICATION_ID and (app != 0 or tables or version != 0):
            raise LogbookError("this SQLite database is not a faultfind logbook; it was left "
                               f"untouched: name another file with --logbook or {ENV_VAR}",
                               file=self.path)
        if version > mig.LATEST_VERSION:
            raise LogbookError(
                f"this logbook was written by a newer faultfind (schema version {version}; this "
                f"faultfind {__version__} knows up to {mig.LATEST_VERSION}); it was left "
                "untouched: upgrade faultfind to read it", file=self.path)
        conn.execute("PRAGMA journal_mode=WAL").fetchone()
        conn.execute("PRAGMA synchronous=FULL")
        conn.execute("PRAGMA foreign_keys=ON")
        conn.execute("PRAGMA secure_delete=ON")
        if version < mig.LATEST_VERSION:
            if version > 0:
                self.backup = self._backup(version)
            self.upgraded = mig.migrate(conn)
        self.schema_version = mig.schema_version(conn)

    def _backup(self, version) -> Path:
        stamp = datetime.now().strftime("%Y%m%d-%H%M%S")
        dest = self.path.with_name(f"{self.path.name}.schema{version}-{stamp}.bak")
        n = 1
        while dest.exists():
            n += 1
            dest = self.path.with_name(f"{self.path.name}.schema{version}-{stamp}-{n}.bak")
        fd = os.open(dest, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
        os.close(fd)
        target = sqlite3.connect(str(dest))
        try:
            self._conn.backup(target)
        finally:
            target.close()
        return dest

    def _corrupt(self, why) -> LogbookError:
        return LogbookError(f"the logbook cannot be read: {why}. It was left untouched: "
                            "restore it from a backup, or move it aside (rename it) so that "
                            "faultfind starts a new one", file=self.path)

    def _error(self, exc) -> LogbookError:
        text = str(exc)
        low = text.lower()
        if "locked" in low or "busy" in low:
            return LogbookError(
                f"the logbook stayed locked by another program for {self.timeout:g} s: close "
                "other faultfind windows and any database tool that has it open, then try "
                "again (nothing was written)", file=self.path)
        if "not a database" in low or "malformed" in low or "corrupt" in low:
            return self._corrupt(f"SQLite says '{text}'")
        if "readonly" in low or "read-only" in low:
            return LogbookError("the logbook is read-only: check the file's and its folder's "
                                "permissions (nothing was written)", file=self.path)
        if "unable to open" in low or "disk i/o" in low or "disk is full" in low:
            return LogbookError(f"the logbook cannot be written ({text}): check the disk has "
                                "space and the folder may be written (nothing was written)",
                                file=self.path)
        if "closed" in low:
            return LogbookError("the logbook is closed", file=self.path)
        return LogbookError(f"the logbook refused the change: {text}", file=self.path)

    @contextmanager
    def _guard(self):
        try:
            yield
        except sqlite3.Error as exc:
            raise self._error(exc) from None

    @contextmanager
    def _write(self):
        conn = self._conn
        conn.execute("BEGIN IMMEDIATE")
        try:
            yield conn
        except BaseException:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")

    def close(self) -> None:
        """Close the file (idempotent)."""
        with self._lock:
            if self._conn is not None:
                self._conn.close()
                self._conn = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def __repr__(self):
        return f"Logbook({str(self.path)!r})"

    @_locked
    def check(self) -> list[str]:
        """Problems SQLite's ``PRAGMA integrity_check`` finds (empty list: none)."""
        found = [r[0] for r in self._conn.execute("PRAGMA integrity_check")]
        found = [] if found == ["ok"] else found
        found += [f"foreign key: {r}" for r in self._conn.execute("PRAGMA foreign_key_check")]
        return found
