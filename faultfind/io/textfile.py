"""Reading a user's text file, with errors that say what to do.

Shared by the circuit, readings and meter-profile loaders: a missing file, a
folder, an unreadable file or a file that is not UTF-8 each get an
:class:`~faultfind.errors.InputError` subclass naming the file (and, for bad
bytes, the line), never a traceback.
"""

from __future__ import annotations

import os

__all__ = ["read_text"]


def read_text(path, error, what: str, hint: str = "save it as UTF-8") -> str:
    """The text of ``path`` (UTF-8, an optional byte-order mark removed).

    Parameters
    ----------
    path : str or os.PathLike
    error : type
        The InputError subclass to raise (CircuitError, ReadingsError, ...).
    what : str
        What the file is, for messages ("circuit file").
    hint : str
        What to do when the file is not UTF-8.

    Raises
    ------
    error
        Missing file, a directory, unreadable, not UTF-8 (with the line).
    TypeError
        ``path`` is not a str or path-like object.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a str or os.PathLike, not {type(path).__name__}")
    name = os.fspath(path)
    try:
        with open(name, "rb") as fh:
            data = fh.read()
    except FileNotFoundError:
        raise error(f"no such file (the {what} was not found)", file=name) from None
    except IsADirectoryError:
        raise error(f"is a directory, not a {what}", file=name) from None
    except OSError as err:
        raise error(f"cannot read the {what} ({err.strerror or err})", file=name) from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = data.count(b"\n", 0, err.start) + 1
        raise error(f"the {what} is not UTF-8 text (byte 0x{data[err.start]:02x}): {hint}",
                    file=name, line=line) from None
