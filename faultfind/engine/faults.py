"""One faulted part of a hypothesis."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Fault"]


@dataclass(frozen=True)
class Fault:
    """One faulted part: ``mode`` is open, short, drift or dead; ``value`` the
    fitted value (SI) for a drift, the fitted resistance (ohms) of a short the
    readings resolve (:mod:`.shorts`), else None."""

    ref: str
    mode: str
    value: float | None = None
    seen: bool = True  # False: a drift the readings do not see (its value is unknown)
