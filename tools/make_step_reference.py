#!/usr/bin/env python3
"""Writes tests/reference/step_reference.json: step-response figures of ideal filter prototypes,
computed by scipy.signal, for tests/ngspice_step.rs (the ideal-op-amp, exact-part board against
scipy).

Each case is the analog prototype from scipy's own design functions (butter, cheby1, bessel with
analog=True; Linkwitz-Riley is butter(n/2) squared, critically damped is n real poles), in
normalized time t·ω0 with ω0 = 2π·fc, then scaled to seconds. scipy.signal.step (zero-order-hold
state-space discretization, exact at the samples for a step) gives the response on a grid of
400,001 points over 14 time constants of the slowest pole (at least 8 periods of the lowest pole);
the figures follow the definitions of analysis::timeresp: overshoot of the peak over the final
value (%), 10-90 % rise time, the last exit from the 1 % and 0.1 % bands (the step height is the
final value, or the peak |y| when the final value is zero), with linear interpolation of the
crossings and a parabola through the largest sample.

Run: python3 tools/make_step_reference.py  (scipy >= 1.8, numpy)
"""
import json
import math
import os

import numpy as np
import scipy
from scipy import signal

CASES = [
    # name, link, zpk builder (normalized to w0 = 1), fc in Hz
    ("cheb14-2dB", "?v=2&resp=lp&family=chebyshev&ripple=2&order=14&fc=1k",
     lambda: signal.cheby1(14, 2, 1.0, "low", analog=True, output="zpk"), 1000.0),
    ("butter4", "?v=2&resp=lp&family=butterworth&order=4&fc=1k",
     lambda: signal.butter(4, 1.0, "low", analog=True, output="zpk"), 1000.0),
    ("butter2", "?v=2&resp=lp&family=butterworth&order=2&fc=1k",
     lambda: signal.butter(2, 1.0, "low", analog=True, output="zpk"), 1000.0),
    ("cheb4-0.5dB", "?v=2&resp=lp&family=chebyshev&ripple=0.5&order=4&fc=2k",
     lambda: signal.cheby1(4, 0.5, 1.0, "low", analog=True, output="zpk"), 2000.0),
    ("cheb7-1dB", "?v=2&resp=lp&family=chebyshev&ripple=1&order=7&fc=1k",
     lambda: signal.cheby1(7, 1, 1.0, "low", analog=True, output="zpk"), 1000.0),
    ("bessel6", "?v=2&resp=lp&family=bessel&order=6&fc=1k",
     lambda: signal.bessel(6, 1.0, "low", analog=True, output="zpk", norm="mag"), 1000.0),
    ("hp-butter4", "?v=2&resp=hp&family=butterworth&order=4&fc=1k",
     lambda: signal.butter(4, 1.0, "high", analog=True, output="zpk"), 1000.0),
    ("hp-cheb3-1dB", "?v=2&resp=hp&family=chebyshev&ripple=1&order=3&fc=500",
     lambda: signal.cheby1(3, 1, 1.0, "high", analog=True, output="zpk"), 500.0),
    # Band-pass: order counts the poles of the whole filter; edges lo·hi = fc², hi − lo = bw.
    ("bp-butter4", "?v=2&resp=bp&family=butterworth&order=4&fc=1k&bw=500",
     lambda: signal.butter(2, bp_edges(1000.0, 500.0), "bandpass", analog=True, output="zpk"),
     1000.0),
    ("lr4", "?v=2&resp=lp&family=linkwitz-riley&order=4&fc=1k",
     lambda: squared(signal.butter(2, 1.0, "low", analog=True, output="zpk")), 1000.0),
    ("critical3", "?v=2&resp=lp&family=critical&order=3&fc=1k",
     lambda: critical(3), 1000.0),
]


def bp_edges(fc, bw):
    """Normalized (to fc) band edges with lo*hi = fc^2 and hi - lo = bw."""
    half = bw / 2.0
    lo = math.sqrt(fc * fc + half * half) - half
    return [lo / fc, (lo + bw) / fc]


def squared(zpk):
    z, p, k = zpk
    return np.concatenate([z, z]), np.concatenate([p, p]), k * k


def critical(n):
    a = 1.0 / math.sqrt(2.0 ** (1.0 / n) - 1.0)
    return np.array([]), -a * np.ones(n), a ** n


def cross(t, y, i, level):
    if i == 0:
        return t[0]
    y0, y1 = y[i - 1], y[i]
    frac = (level - y0) / (y1 - y0) if y1 != y0 else 0.0
    return t[i - 1] + min(max(frac, 0.0), 1.0) * (t[i] - t[i - 1])


def figures(t, y, fv):
    peak_abs = np.max(np.abs(y))
    has_final = abs(fv) > 1e-9 * peak_abs
    yn = y / fv if has_final else y
    height = 1.0 if has_final else peak_abs
    target = 1.0 if has_final else 0.0

    def settle(tol):
        band = tol * height
        out = np.nonzero(np.abs(yn - target) > band)[0]
        if len(out) == 0:
            return t[0]
        last = out[-1]
        if last + 1 >= len(yn):
            return None
        level = target + band if yn[last] > target else target - band
        return cross(t, yn, last + 1, level)

    res = {"final_value": fv, "settling_1pct_s": settle(0.01), "settling_01pct_s": settle(0.001)}
    if has_final:
        i = int(np.argmax(yn))
        peak = yn[i]
        if 0 < i < len(yn) - 1:
            a, b, c = yn[i - 1], yn[i], yn[i + 1]
            den = a - 2 * b + c
            if den < 0:
                peak = b - (a - c) ** 2 / (8 * den)
        res["overshoot_pct"] = max((peak - 1.0) * 100.0, 0.0)
        i10 = int(np.argmax(yn >= 0.1))
        i90 = int(np.argmax(yn >= 0.9))
        res["rise_time_s"] = cross(t, yn, i90, 0.9) - cross(t, yn, i10, 0.1)
    else:
        res["overshoot_pct"] = None
        res["rise_time_s"] = None
        res["peak_abs"] = float(peak_abs)
    return res


def main():
    out = []
    for name, link, build, fc in CASES:
        z, p, k = build()
        w0 = 2 * math.pi * fc
        decay = float(np.min(-p.real))
        lowest = float(np.min(np.abs(p)))
        t_end_n = max(14.0 / decay, 8.0 * 2.0 * math.pi / lowest)
        tn = np.linspace(0.0, t_end_n, 400_001)
        _, yn = signal.step((z, p, k), T=tn)
        fv = float(np.real(k * np.prod(-z) / np.prod(-p))) if len(z) == 0 or np.all(z != 0) else 0.0
        fig = figures(tn / w0, np.real(yn), fv)
        fig.update({"name": name, "link": link, "t_end_s": t_end_n / w0})
        out.append(fig)
    path = os.path.join(os.path.dirname(__file__), "..", "tests", "reference", "step_reference.json")
    doc = {
        "source": "scipy.signal.step of scipy.signal butter/cheby1/bessel (analog=True) prototypes, "
                  "scipy " + scipy.__version__ + ", by tools/make_step_reference.py",
        "cases": out,
    }
    with open(path, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
