"""Model spread of transistors (vbe, gain) and zeners (forward voltage) in bands and evidence.

Outside references: the brute-force check re-solves the board with the
engine's oracle (a full Newton solve per reading, engine/oracle.py, itself
checked against ngspice in tests/reference/test_semis_ngspice.py) at the
limits of each spread; the spreads are engine/modelspread.py's
(from memory / common practice, documented there).  The Monte Carlo draws
healthy boards from the same model the bands state (resistors uniform in
log within tolerance, vbe, gain and zener forward voltage uniform in log
within their spread) and checks the bands' ~95 % coverage (GUM G.2).
"""

from __future__ import annotations

import dataclasses

import numpy as np
from numpy.testing import assert_allclose

from faultfind.engine.evidence import Evidence
from faultfind.engine.modelspread import MODEL_SPREAD, model_parameters, model_spread_columns
from faultfind.engine.oracle import oracle_readings
from faultfind.engine.spread import tolerance_bands
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

METERS = {"default": dataclasses.replace(DEFAULT_METER, name="default")}
T = 0.05


def stage():
    """A divider-biased common-emitter stage with a zener-fed reference (invented)."""
    return Circuit("stage", "0", (
        Part("V1", "voltage-source", ("vcc", "0"), 12.0),
        Part("RB1", "resistor", ("vcc", "b"), 47e3, T, T),
        Part("RB2", "resistor", ("b", "0"), 10e3, T, T),
        Part("RC", "resistor", ("vcc", "c"), 4.7e3, T, T),
        Part("RE", "resistor", ("e", "0"), 1e3, T, T),
        Part("Q1", "npn", ("c", "b", "e")),
        Part("RZ", "resistor", ("vcc", "z"), 1.5e3, T, T),
        Part("DZ", "zener", ("0", "z"), 5.1)))


DC = [Reading("voltage", "dc", n, "0") for n in ("b", "c", "e", "z")]
OFF = [Reading("diode-test", None, "b", "e"), Reading("diode-test", None, "0", "z")]


def drawn(c, rng):
    """A healthy board drawn from the tolerances and the model spread."""
    parts = []
    spread = {(ref, key): (lo, hi) for ref, key, lo, hi in model_parameters(c)}
    for p in c.parts:
        ch = {}
        if p.kind == "resistor":
            ch["value"] = p.value * np.exp(rng.uniform(np.log1p(-p.tol_low), np.log1p(p.tol_high)))
        for (ref, key), (lo, hi) in spread.items():
            if ref == p.ref:
                ch[key] = p.junction(key) * np.exp(rng.uniform(np.log1p(-lo), np.log1p(hi)))
        parts.append(dataclasses.replace(p, **ch))
    return dataclasses.replace(c, parts=tuple(parts))


def with_key(c, ref, key, factor):
    return dataclasses.replace(c, parts=tuple(
        dataclasses.replace(p, **{key: p.junction(key) * factor}) if p.ref == ref else p
        for p in c.parts))


def test_linear_board_has_no_model_spread():
    c = Circuit("div", "0", (Part("V1", "voltage-source", ("a", "0"), 10.0),
                             Part("R1", "resistor", ("a", "b"), 1e3, T, T),
                             Part("R2", "resistor", ("b", "0"), 1e3, T, T)))
    assert model_parameters(c) == []
    assert model_spread_columns(c, [Reading("voltage", "dc", "b", "0")], METERS).shape == (1, 0)


def test_base_emitter_diode_test_band_spans_the_vbe_spread():
    c = stage()
    value, low, high, _ = tolerance_bands(c, OFF, METERS)
    lo, hi = MODEL_SPREAD[("npn", "vbe")]
    # brute force: the oracle at vbe's two limits
    y_lo = oracle_readings(with_key(c, "Q1", "vbe", 1 - lo), OFF[:1], METERS).real[0]
    y_hi = oracle_readings(with_key(c, "Q1", "vbe", 1 + hi), OFF[:1], METERS).real[0]
    assert y_hi - y_lo > 0.08                       # about +/-50 mV
    # one part alone governs it: the band is that part's excursion (within the
    # resistors' small share and 1 mV)
    assert_allclose([low[0], high[0]], [y_lo, y_hi], atol=2e-3)
    # the zener's forward diode test carries its +/-10 %
    z_lo = oracle_readings(with_key(c, "DZ", "forward_voltage", 0.9), OFF[1:], METERS).real[0]
    z_hi = oracle_readings(with_key(c, "DZ", "forward_voltage", 1.1), OFF[1:], METERS).real[0]
    assert_allclose([low[1], high[1]], [z_lo, z_hi], atol=2e-3)


def test_collector_band_holds_each_spread_alone():
    c = stage()
    value, low, high, _ = tolerance_bands(c, DC, METERS)
    ys = []
    for ref, key, lo, hi in model_parameters(c):
        for f in (1 - lo, 1 + hi):
            ys.append(oracle_readings(with_key(c, ref, key, f), DC, METERS).real)
    ys = np.array(ys)
    assert np.all(ys >= low - 1e-9) and np.all(ys <= high + 1e-9)
    # the collector band is wider than any one spread alone moves it (the parts add)
    assert high[1] - low[1] > (ys[:, 1].max() - ys[:, 1].min())


def test_healthy_boards_fall_in_their_bands_about_95_percent():
    c = stage()
    reads = DC + OFF
    value, low, high, _ = tolerance_bands(c, reads, METERS)
    rng = np.random.default_rng(20261204)
    inside = []
    for _ in range(150):
        y = oracle_readings(drawn(c, rng), reads, METERS).real
        inside.append((y >= low) & (y <= high))
    frac = np.mean(inside)
    # ~95 % bands; one-part-governed readings are covered fully (bands.py)
    assert 0.93 <= frac <= 1.0, frac
    assert np.mean(inside, axis=0).min() >= 0.85


def test_evidence_covariance_carries_the_model_spread():
    c = stage()
    from faultfind.engine.predict import predict
    pred = predict(c, OFF, METERS)
    M = model_spread_columns(c, OFF, METERS, pred)
    mp = model_parameters(c)
    j = [k for k, (ref, key, _, _) in enumerate(mp) if (ref, key) == ("Q1", "vbe")][0]
    # one sigma of a rectangular +/-8 % log spread: ln(1.08)/sqrt(3) of 0.65 V, about 30 mV
    # at the transistor's own current; the diode test's current differs, so a loose check
    assert 0.015 < M[0, j] < 0.04
    rd = [dataclasses.replace(r, value=float(v)) for r, v in zip(OFF, pred.value)]
    tl = np.zeros(len(pred.params))
    ev0 = Evidence(rd, METERS, pred.value, pred.sensitivity, tl, tl)
    ev = Evidence(rd, METERS, pred.value, pred.sensitivity, tl, tl, model_spread=M)
    assert_allclose(np.diag(ev.T0) - np.diag(ev0.T0), (M ** 2).sum(axis=1), rtol=1e-12)


def two_stages():
    """The stage of :func:`stage` and a second, separately biased switch stage on the
    same supply (invented): the second transistor's spread reaches the first stage's
    readings only through reversed or unbiased junctions."""
    c = stage()
    return dataclasses.replace(c, parts=c.parts + (
        Part("RB3", "resistor", ("vcc", "b2"), 220e3, T, T),
        Part("RB4", "resistor", ("b2", "0"), 10e3, T, T),
        Part("RC2", "resistor", ("vcc", "c2"), 10e3, T, T),
        Part("Q2", "npn", ("c2", "b2", "0"))))


def test_screened_columns_equal_the_re_solved_ones():
    # the linearised screen (engine/modelspread.py) skips re-solves only where the
    # effect is below SCREEN_SHARE of the meter's step: the columns then agree with
    # exact re-solves of every key to about that (oracle: the same function without
    # the screen, every key re-solved by Newton)
    from faultfind.engine.bands import log_tolerance
    from faultfind.engine.modelspread import SCREEN_SHARE, _screen
    from faultfind.engine.predict import predict
    c = two_stages()
    reads = DC + [Reading("voltage", "dc", n, "0") for n in ("b2", "c2")] + OFF \
        + [Reading("diode-test", None, "b2", "0")]
    share, offs = {}, {}
    pred = predict(c, reads, METERS, share=share, off_warm=offs)
    exact = model_spread_columns(c, reads, METERS, pred)
    got = model_spread_columns(c, reads, METERS, pred, share=share, off_ops=offs)
    step = METERS["default"].voltage_resolution
    assert_allclose(got, exact, rtol=0, atol=2 * SCREEN_SHARE * step)
    assert np.abs(exact).max() > 0.01            # the spread is there (tens of mV)
    mp = model_parameters(c)
    factors = []
    for _, _, lo, hi in mp:
        cc, h = log_tolerance(lo, hi)
        factors.append(np.exp([float(cc) + h / np.sqrt(3.0), float(cc) - h / np.sqrt(3.0)]))
    need, _ = _screen(c, reads, METERS, mp, factors, share, offs)
    assert need.sum() < need.size                # some re-solves were skipped


def test_model_variants_solved_on_the_healthy_system_equal_full_predictions():
    # engine/modelspread.py solves a key's DC voltages on a copy of the healthy system with
    # the part's law changed; they must equal a full prediction of the board with that key
    # moved (engine/predict.py, itself checked against ngspice)
    from faultfind.engine.modelspread import _dc_voltages, _with_key, _with_part
    from faultfind.engine.predict import predict
    c = two_stages()
    reads = DC + [Reading("voltage", "dc", n, "0") for n in ("b2", "c2")]
    share = {}
    predict(c, reads, METERS, share=share)
    for ref, key, f in (("Q1", "vbe", 1.05), ("Q2", "gain", 0.6), ("DZ", "forward_voltage", 0.9)):
        got = _dc_voltages(share[("dc", None)], ref, [_with_part(c.part(ref), key, f)], reads,
                           list(range(len(reads))), METERS)
        ref_val = predict(_with_key(c, ref, key, f), reads, METERS).value
        assert_allclose(got[0], ref_val, rtol=1e-9, atol=1e-9)
