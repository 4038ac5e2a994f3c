"""Part-to-part spread of the semiconductor model keys that carry no tolerance.

A transistor has no value (formats.md section 4: ``gain`` and ``vbe``, no
tolerance) and a zener's ``forward_voltage`` is not a parameter, yet real
parts of one type differ.  This module names the spread carried for each
such key (:data:`MODEL_SPREAD`) and computes its effect on the displays by
exact re-solves of the healthy board from its operating point: the tolerance
bands (engine/spread.py) move each key over its spread like a junction's
value; the evidence (engine/evidence.py) takes the one-sigma effects as
extra covariance columns (:func:`model_spread_columns`).  These keys are no
fault-hypothesis parameters.  A linear board has none: nothing here runs.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..errors import SolveError
from .bands import log_tolerance
from .predict import predict

__all__ = ["MODEL_SPREAD", "model_parameters", "model_spread_columns"]

#: Part-to-part spread of the semiconductor model keys no file tolerance
#: covers, as (below, above) relative limits, rectangular on the log scale
#: like a part's tolerance (docs/junction-models.md, "Model spread"):
#:
#: * ``vbe`` +/-8 % (about +/-50 mV at 0.65 V): small-signal silicon
#:   transistors of one type differ by tens of mV in base-emitter voltage at
#:   1 mA (from memory);
#: * ``gain`` -50 %/+100 %: datasheets give hFE as a min..max range of a
#:   factor 2 to 3 within one type, e.g. 100..300 (from memory);
#: * a zener's ``forward_voltage`` +/-10 %, as a diode's forward voltage
#:   (common practice (no source)).
MODEL_SPREAD = {
    ("npn", "vbe"): (0.08, 0.08), ("pnp", "vbe"): (0.08, 0.08),
    ("npn", "gain"): (0.5, 1.0), ("pnp", "gain"): (0.5, 1.0),
    ("zener", "forward_voltage"): (0.10, 0.10),
}


def model_parameters(circuit):
    """The model keys spread on ``circuit``: list of ``(ref, key, below, above)``.

    Empty on a circuit without semiconductors (a linear board is unchanged).
    """
    if not circuit.is_nonlinear:
        return []
    out = []
    for p in circuit.parts:
        for (kind, key), (lo, hi) in MODEL_SPREAD.items():
            if p.kind == kind:
                out.append((p.ref, key, lo, hi))
    return out


def _with_key(circuit, ref, key, factor):
    """``circuit`` with part ``ref``'s model ``key`` multiplied by ``factor``."""
    parts = tuple(replace(p, **{key: p.junction(key) * float(factor)}) if p.ref == ref else p
                  for p in circuit.parts)
    return replace(circuit, parts=parts)


def _ol_top(readings, meters, P, idx):
    """A diode test driven over the display's top reads OL: put the top there."""
    for i in idx:
        rd = readings[i]
        if rd.quantity == "diode-test":
            m = meters[rd.meter or "default"]
            top = min(m.diode_test_max, m.diode_test_voltage)
            P[:, i] = np.where(np.isinf(P[:, i]), top, P[:, i])
    return P


def _model_resolved(circuit, readings, meters, ref, key, factors, y0, warm, off_warm=None):
    """Displays with model ``key`` of ``ref`` at each factor (exact re-solves; values
    only, power-off readings warm-started from ``off_warm``)."""
    P = np.tile(np.asarray(y0, dtype=float), (len(factors), 1))
    for k, f in enumerate(factors):
        try:
            P[k] = predict(_with_key(circuit, ref, key, f), readings, meters, warm=warm,
                           off_warm=off_warm, sens=False).value
        except SolveError:
            P[k] = np.nan
    return _ol_top(readings, meters, P, range(len(readings)))


def model_spread_columns(circuit, readings, meters, pred=None):
    """One-sigma effects of the model spread on the displays.

    Each column is ``(y(c + s) - y(c - s)) / 2`` for one entry of
    :func:`model_parameters`, with ``c`` and ``s`` the centre and standard
    deviation of its log-value (rectangular over :data:`MODEL_SPREAD`), by
    exact re-solves from the nominal operating point; 0 where a display is
    OL or a re-solve fails.

    Parameters
    ----------
    circuit : Circuit
    readings : list of Reading
    meters : dict
        Meter profiles with "default".
    pred : Prediction, optional
        The healthy prediction (computed when omitted).

    Returns
    -------
    ndarray, shape (n, k)
        ``k = len(model_parameters(circuit))`` (0 on a linear board).
    """
    readings = list(readings)
    mp = model_parameters(circuit)
    if not mp or not readings:
        return np.zeros((len(readings), 0))
    if pred is None:
        pred = predict(circuit, readings, meters)
    y0 = np.asarray(pred.value, dtype=float)
    yf = np.where(np.isfinite(y0), y0, 0.0)
    cols = np.zeros((len(readings), len(mp)))
    # power-off readings start from the first re-solve's solution of the same reading
    off_warm = {}
    for j, (ref, key, lo, hi) in enumerate(mp):
        c, h = log_tolerance(lo, hi)
        s = float(h) / np.sqrt(3.0)
        P = _model_resolved(circuit, readings, meters, ref, key,
                            np.exp([float(c) + s, float(c) - s]), yf, pred.operating_point,
                            off_warm)
        d = (P[0] - P[1]) / 2.0
        cols[:, j] = np.where(np.isfinite(d) & np.isfinite(y0), d, 0.0)
    return cols


