"""Tags on logbook sessions: the site or unit family a session belongs to.

A tag is a short line of text (``north-pumps``, ``site:Harbour``, ``BP
panels``) a team puts on its sessions so that fault priors can be learned from
one site's or one family's outcomes (docs/priors.md).  Tags are compared
ignoring ASCII case.  Unlike readings, a session's tags may be added or removed
after it is closed: they say where the work belongs, not what was measured.

The table is ``session_tags`` (migration ``0005_session_tags``)::

    with Logbook("site.sqlite") as book:
        add_tags(book, 3, ["north-pumps"])
        tags_of(book, 3)                  # ['north-pumps']
"""

from __future__ import annotations

from faultfind.errors import InputError, LogbookError

__all__ = ["check_tag", "add_tags", "remove_tags", "tags_of", "all_tags", "tags_by_session",
           "MAX_TAG"]

#: Longest tag, in characters.
MAX_TAG = 80


def check_tag(tag) -> str:
    """A tag as stored: stripped, one line, 1..:data:`MAX_TAG` characters.

    Raises
    ------
    InputError
        Not text, empty, more than one line, too long, or with control characters.
    """
    if not isinstance(tag, str):
        raise InputError(f"a tag must be text, got {type(tag).__name__}", key="tag")
    t = tag.strip()
    if not t:
        raise InputError("a tag must not be empty", key="tag")
    if any(ord(ch) < 32 or ord(ch) == 127 for ch in t):
        raise InputError(f"a tag is one line of plain text, not {tag!r}", key="tag")
    if len(t) > MAX_TAG:
        raise InputError(f"a tag has at most {MAX_TAG} characters, this one {len(t)}", key="tag")
    return t


def _sid(book, session_id) -> int:
    if isinstance(session_id, bool) or not isinstance(session_id, int) or session_id < 1:
        raise LogbookError(f"a session is a number >= 1, got {session_id!r}", key="session")
    return session_id


def _exists(book, sid) -> None:
    if book._conn.execute("SELECT 1 FROM sessions WHERE id = ?", (sid,)).fetchone() is None:
        raise LogbookError(f"there is no session {sid} in this logbook ('faultfind log list' "
                           "shows them)", file=book.path, key="session")


def _run(book, fn):
    with book._lock:
        if book._conn is None:
            raise LogbookError("the logbook is closed", file=book.path)
        with book._guard():
            return fn()


def add_tags(book, session_id, tags) -> list[str]:
    """Put tags on a session (open or closed); a tag it has already is kept once.

    Parameters
    ----------
    book : Logbook
    session_id : int
    tags : sequence of str

    Returns
    -------
    list of str
        The session's tags afterwards, sorted ignoring case.

    Raises
    ------
    InputError
        A bad tag (nothing is written); LogbookError: no such session.
    """
    sid = _sid(book, session_id)
    if isinstance(tags, str):
        raise InputError("give a list of tags, not one text", key="tag")
    clean = [check_tag(t) for t in tags]

    def go():
        with book._write() as c:
            _exists(book, sid)
            c.executemany("INSERT OR IGNORE INTO session_tags (session_id, tag) VALUES (?, ?)",
                          [(sid, t) for t in clean])
        return _tags(book, sid)

    return _run(book, go)


def remove_tags(book, session_id, tags) -> list[str]:
    """Take tags off a session (a tag it does not have is an error, nothing is changed).

    Returns
    -------
    list of str
        The session's tags afterwards.
    """
    sid = _sid(book, session_id)
    if isinstance(tags, str):
        raise InputError("give a list of tags, not one text", key="tag")
    clean = [check_tag(t) for t in tags]

    def go():
        with book._write() as c:
            _exists(book, sid)
            have = {t.lower() for t in _tags(book, sid)}
            for t in clean:
                if t.lower() not in have:
                    raise InputError(f"session {sid} has no tag {t!r}", key="tag")
            c.executemany("DELETE FROM session_tags WHERE session_id = ? AND tag = ?",
                          [(sid, t) for t in clean])
        return _tags(book, sid)

    return _run(book, go)


def _tags(book, sid) -> list[str]:
    rows = book._conn.execute("SELECT tag FROM session_tags WHERE session_id = ?", (sid,))
    return sorted((r[0] for r in rows), key=str.lower)


def tags_of(book, session_id) -> list[str]:
    """A session's tags, sorted ignoring case (LogbookError: no such session)."""
    sid = _sid(book, session_id)

    def go():
        _exists(book, sid)
        return _tags(book, sid)

    return _run(book, go)


def all_tags(book) -> dict:
    """Every tag in the logbook -> number of sessions carrying it."""
    def go():
        rows = book._conn.execute(
            "SELECT min(tag), count(*) FROM session_tags GROUP BY tag ORDER BY tag")
        return {t: n for t, n in rows}

    return _run(book, go)


def tags_by_session(book) -> dict:
    """Every tagged session -> its tags (sorted ignoring case); untagged sessions are absent."""
    def go():
        out = {}
        for sid, tag in book._conn.execute("SELECT session_id, tag FROM session_tags"):
            out.setdefault(sid, []).append(tag)
        return {sid: sorted(tags, key=str.lower) for sid, tags in out.items()}

    return _run(book, go)
