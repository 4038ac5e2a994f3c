"""What a meter would display on a circuit, and how that depends on every part.

The entry point of the predictions.  A linear circuit (no semiconductor)
goes to engine/linpredict.py, exactly as before semiconductors existed (one
factorization per analysis, rank-one meter loading, adjoint sensitivities;
its docstring has the formulas).  A circuit with semiconductors goes to
engine/semis.py: the DC operating point by Newton's method, AC readings as
the small-signal response about it, power-off readings with the junctions in
place, and the same sensitivities on the linearized network.
"""

from __future__ import annotations

from ..model import Circuit
from .linpredict import (Prediction, Stamps, _lifted, analysis_key, lifted_value, parameters,
                         predict_linear)
from .semis import predict_nonlinear

__all__ = ["Prediction", "Stamps", "parameters", "predict", "analysis_key", "lifted_value"]
_ = _lifted  # re-exported for engine/faulted.py


def predict(circuit: Circuit, readings, meters: dict, overrides: dict | None = None, *,
            share: dict | None = None, warm=None, off_warm=None, off_sens=True,
            sens=True, off_keep=None) -> Prediction:
    """Predict the meter displays of ``readings`` on ``circuit``.

    Parameters
    ----------
    circuit : Circuit
        A validated circuit.
    readings : sequence of Reading
        Validated against the circuit (nodes and parts exist, ``minus``
        resolved).  Their ``value`` is ignored.
    meters : dict
        Meter profile name to :class:`~faultfind.model.MeterProfile`; must
        hold ``"default"``, used where a reading names no meter.
    overrides : dict, optional
        Faults to apply: for linear parts a value, ``"open"``, ``"short"``
        or ``"dead"`` (engine/mna.py); for semiconductors the forms listed
        in engine/semis.py.  This is the plain re-assemble-and-solve path.
    share : dict, optional
        Filled with each analysis' network, factors and per-reading solves
        (analysis key to a group object with ``net``, ``lu``, ``x`` and
        ``cols``) so that a caller needing the same network does not factor
        it again.  An analysis already in ``share`` (from an earlier call on
        the same circuit, without overrides) is reused.
    warm : dict or OperatingPoint, optional
        Circuits with semiconductors: element voltages to start Newton from
        (an earlier prediction's ``operating_point``).  Ignored for a linear
        circuit.
    off_warm : dict, optional
        Circuits with semiconductors: power-off readings' solutions to start
        from, filled as they are solved (engine/semis.py).  Ignored for a
        linear circuit.
    off_sens : bool, optional
        Circuits with semiconductors: False leaves the power-off readings'
        sensitivity rows at zero (values unchanged, no factorization each).
    sens : bool, optional
        Circuits with semiconductors: False leaves every sensitivity row at
        zero (the values only, no adjoint solves).  Ignored for a linear
        circuit.
    off_keep : dict, optional
        Circuits with semiconductors: filled with every power-off reading's
        solution (a warm start for the same reading on the same board).

    Returns
    -------
    Prediction
        ``operating_point`` is set for a circuit with semiconductors.

    Raises
    ------
    ValueError
        ``meters`` lacks a profile a reading names, or a reading names a node
        or part the circuit lacks.
    SolveError
        The circuit's equations are singular.
    ConvergenceError
        A circuit with semiconductors has no operating point the engine can
        find (an InputError naming the parts).
    """
    if not circuit.is_nonlinear:
        return predict_linear(circuit, readings, meters, overrides, share=share)
    return predict_nonlinear(circuit, readings, meters, overrides, share=share, warm=warm, off_warm=off_warm,
                             off_sens=off_sens, sens=sens, off_keep=off_keep)
