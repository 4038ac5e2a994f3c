"""Monte Carlo coverage of the tolerance bands on a board with semiconductors.

Outside reference: the Monte Carlo method of JCGM 101:2008 (GUM Supplement 1):
draw every part's value from the distribution faultfind documents (uniform on
a log scale inside its tolerance, GUM 4.3.7; the transistor's vbe and gain and
the zener's forward voltage likewise inside their model spread,
engine/modelspread.py), solve the full nonlinear circuit
for each draw (Newton's method to convergence, the meter in place), and count
how often the reading falls inside the band ``expect`` gives.  A ~95 % band
should hold at least 90 % of 600 draws (binomial standard error about 0.9 %)
for every reading, and at least 93 % on average.

The board is invented: a 24 V panel with an indicator LED, a zener-regulated
sensor supply, a transistor stage reading it, and power-off diode tests across
the LED, the zener and a steering diode.
"""

from __future__ import annotations

import numpy as np

from faultfind.engine.predict import predict
from faultfind.expect import expect
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading
from faultfind.simulate import draw_board

METERS = {"default": DEFAULT_METER}
N_DRAWS = 600

BOARD = Circuit("tank heater panel: indicator, sensor supply, level stage", "0V", (
    Part("PS1", "voltage-source", ("+24V", "0V"), 24.0, 0.02, 0.02),
    Part("R1", "resistor", ("+24V", "LA"), 2200.0, 0.05, 0.05),
    Part("LED1", "led", ("LA", "0V"), 2.0, 0.1, 0.1),
    Part("R2", "resistor", ("+24V", "Z"), 1000.0, 0.05, 0.05),
    Part("ZD1", "zener", ("0V", "Z"), 5.1, 0.05, 0.05, series_resistance=10.0),
    Part("R3", "resistor", ("Z", "B"), 47e3, 0.05, 0.05),
    Part("R4", "resistor", ("B", "0V"), 10e3, 0.05, 0.05),
    Part("Q1", "npn", ("C", "B", "E"), None, gain=150.0),
    Part("R5", "resistor", ("+24V", "C"), 4700.0, 0.05, 0.05),
    Part("R6", "resistor", ("E", "0V"), 680.0, 0.05, 0.05),
    Part("D1", "diode", ("C", "OUT"), 0.65, 0.1, 0.1),
    Part("R7", "resistor", ("OUT", "0V"), 22e3, 0.05, 0.05),
))

READINGS = [Reading("voltage", "dc", n, "0V") for n in ("LA", "Z", "B", "C", "E", "OUT")] + [
    Reading("current", "dc", part="LED1"), Reading("current", "dc", part="ZD1"),
    Reading("diode-test", None, part="LED1"), Reading("diode-test", None, part="D1"),
    Reading("diode-test", None, "0V", "Z"), Reading("resistance", None, part="R7")]


def test_bands_cover_the_monte_carlo_spread_of_the_nonlinear_board():
    exp = expect(BOARD, READINGS, METERS)
    low = np.array([e.low for e in exp])
    high = np.array([e.high for e in exp])
    rng = np.random.default_rng(20261204)
    vals = np.array([predict(draw_board(BOARD, rng, model_spread=True), READINGS, METERS).value for _ in range(N_DRAWS)])
    inside = (vals >= low - 1e-12 * np.abs(low)) & (vals <= high + 1e-12 * np.abs(high))
    # an OL diode test is inside a band that reaches the display's top (a healthy LED
    # drawn high in its tolerance shows OL on a 2 V diode test)
    top = DEFAULT_METER.diode_test_max
    inside |= np.isinf(vals) & (high >= top - 1e-12)[None, :]
    coverage = inside.mean(axis=0)
    report = {r.where(): round(float(c), 3) for r, c in zip(READINGS, coverage)}
    assert np.all(coverage >= 0.90), report
    assert coverage.mean() >= 0.93, report
    # and not needlessly wide: the draws reach most of each band
    shown = np.where(np.isinf(vals), top, vals)
    span = shown.max(axis=0) - shown.min(axis=0)
    assert np.all(span >= 0.6 * (high - low)), dict(zip(report, (span / (high - low)).round(2)))
