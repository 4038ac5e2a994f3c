"""Error classes of faultfind.

Every error a user can cause derives from :class:`InputError`, which is also a
:class:`ValueError` (so a caller may catch either).  Each error carries the
place it is about -- a file, a line, a part reference, a key -- and renders
them in its message so that the command line can print it as it stands.
"""

from __future__ import annotations

__all__ = [
    "FaultfindError",
    "InputError",
    "UnitError",
    "CircuitError",
    "ReadingsError",
    "MeterError",
    "LogbookError",
    "PriorsError",
    "SolveError",
    "ConvergenceError",
]


class FaultfindError(Exception):
    """Base class of every error faultfind raises on purpose."""


class InputError(FaultfindError, ValueError):
    """Bad input: a file, a value or an argument the user supplied.

    Parameters
    ----------
    message : str
        What is wrong, in words a technician understands.
    file : str, optional
        The file the input came from.
    line : int, optional
        1-based line number in that file.
    part : str, optional
        Reference designator of the part concerned.
    key : str, optional
        The key or column concerned.
    """

    def __init__(self, message, *, file=None, line=None, part=None, key=None):
        self.message = message
        self.file = None if file is None else str(file)
        self.line = line
        self.part = part
        self.key = key
        super().__init__(self.__str__())

    def where(self) -> str:
        """The place as ``file:line: part R1: key 'value'`` (parts omitted when unknown)."""
        bits = []
        if self.file is not None:
            bits.append(self.file + (f":{self.line}" if self.line is not None else ""))
        elif self.line is not None:
            bits.append(f"line {self.line}")
        if self.part is not None:
            bits.append(f"part {self.part}")
        if self.key is not None:
            bits.append(f"key '{self.key}'")
        return ": ".join(bits)

    def with_context(self, **kw) -> "InputError":
        """A copy of this error of the same class with missing places filled in from ``kw``."""
        fields = dict(file=self.file, line=self.line, part=self.part, key=self.key)
        for name, value in kw.items():
            if fields.get(name) is None:
                fields[name] = value
        return type(self)(self.message, **fields)

    def __str__(self) -> str:
        where = self.where()
        return f"{where}: {self.message}" if where else self.message


class UnitError(InputError):
    """A value, unit or tolerance that does not parse or does not fit."""


class CircuitError(InputError):
    """A circuit file that is not valid format 1."""


class ReadingsError(InputError):
    """A readings file (CSV) row or column that is not valid."""


class MeterError(InputError):
    """A meter profile file that is not valid."""


class LogbookError(InputError):
    """A logbook that cannot be opened or written safely."""


class PriorsError(InputError):
    """An outcome-counts (priors) file that is not valid (docs/priors.md)."""


class SolveError(FaultfindError):
    """The network equations have no unique solution (singular system)."""


class ConvergenceError(InputError, SolveError):
    """The nonlinear (semiconductor) equations did not settle on an operating point.

    Raised when Newton's method, then gmin stepping, then source stepping all
    fail (engine/nonlinear.py).  It is an :class:`InputError` (and so a
    ``ValueError``): the circuit as drawn has no operating point the engine
    can find, usually a drawing mistake (a junction across a supply with
    nothing to limit its current, a transistor wired backwards).  It is also a
    :class:`SolveError`, so code that treats an unsolvable faulted variant as
    undefined keeps doing so.

    Attributes
    ----------
    parts : tuple of str
        The semiconductor parts whose junctions had not settled.
    """

    def __init__(self, message, *, parts=(), **kw):
        self.parts = tuple(parts)
        if kw.get("part") is None and self.parts:
            kw["part"] = ", ".join(self.parts[:8]) + (
                f" and {len(self.parts) - 8} more" if len(self.parts) > 8 else "")
        super().__init__(message, **kw)
