"""Export: a session's readings written back as a readings file (CSV)."""

from __future__ import annotations

from faultfind.io.readings_file import write_readings

__all__ = ["Export"]


class Export:
    """Writing a session out (a part of :class:`~faultfind.io.logbook.Logbook`)."""

    def export_readings(self, session_id, path_or_buffer, *, include_struck=False) -> int:
        """Write a session's readings as a readings file (CSV, via pandas).

        Parameters
        ----------
        session_id : int
        path_or_buffer : str, os.PathLike or text stream
        include_struck : bool, optional
            Also the readings struck out (default: only those that count).

        Returns
        -------
        int
            Rows written.  :func:`faultfind.io.readings_file.load_readings`
            reads the file back to the same readings.

        Raises
        ------
        LogbookError
            No such session.
        ReadingsError
            The file cannot be written.
        """
        s = self.get_session(session_id)
        rows = [lr.reading for lr in s.readings if include_struck or not lr.struck]
        write_readings(rows, path_or_buffer)
        return len(rows)
