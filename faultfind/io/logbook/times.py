"""Times as the logbook stores them (ISO 8601, UTC, milliseconds) and shows them (local)."""

from __future__ import annotations

from datetime import date, datetime, time, timezone

from faultfind.errors import InputError

__all__ = ["parse_time", "format_time"]


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


def parse_time(value, what="time", *, end_of_day=False) -> str:
    """A moment as the logbook stores it: ISO 8601 in UTC, milliseconds.

    Parameters
    ----------
    value : str, datetime.datetime or datetime.date
        ``YYYY-MM-DD`` or an ISO 8601 date and time; a time without a UTC
        offset, and a date, are local time.
    what : str, optional
        The argument's name, for messages.
    end_of_day : bool, optional
        For a bare date: the last moment of that day instead of its start
        (an inclusive ``--until``).

    Returns
    -------
    str
        e.g. ``"2026-03-04T09:15:00.000+00:00"``; such strings sort in time
        order.

    Raises
    ------
    InputError
        Not a date or time, naming ``what``.
    """
    if isinstance(value, str):
        text = value.strip()
        try:
            value = (date.fromisoformat(text) if len(text) == 10
                     else datetime.fromisoformat(text.replace("Z", "+00:00")))
        except ValueError:
            raise InputError(f"{text!r} is not a date or time: write YYYY-MM-DD or "
                             "YYYY-MM-DDTHH:MM", key=what) from None
    if isinstance(value, date) and not isinstance(value, datetime):
        value = datetime.combine(value, time.max if end_of_day else time.min)
    if not isinstance(value, datetime):
        raise InputError(f"expected a date or time, got {type(value).__name__}", key=what)
    if value.tzinfo is None:
        value = value.astimezone()  # naive: local time
    return value.astimezone(timezone.utc).isoformat(timespec="milliseconds")


def format_time(stored, *, seconds=False) -> str:
    """A stored time for people: local time ``YYYY-MM-DD HH:MM`` (``""`` for None)."""
    if not stored:
        return ""
    t = datetime.fromisoformat(stored).astimezone()
    return t.strftime("%Y-%m-%d %H:%M:%S" if seconds else "%Y-%m-%d %H:%M")
