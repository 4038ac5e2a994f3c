"""One faulted part of a hypothesis."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Fault"]


@dataclass(frozen=True)
class Fault:
    """One faulted part: ``mode`` is one of the part's fault modes (open, short,
    drift, dead; for semiconductors also leaky, base-emitter-open,
    base-emitter-short); ``value`` the fitted value (SI) for a drift (a
    junction's forward or zener voltage), the fitted resistance (ohms) of a
    short the readings resolve (:mod:`.shorts`) or of a leaky diode's leak
    (:mod:`.junction_faults`), else None."""

    ref: str
    mode: str
    value: float | None = None
    seen: bool = True  # False: a drift the readings do not see (its value is unknown)
