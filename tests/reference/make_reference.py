#!/usr/bin/env python3
"""Reference data for tests/synthesis.rs, produced by scipy.signal.

Writes tests/reference/synthesis_reference.json next to this script:

* analog low-pass prototypes for orders 1-20: buttap, cheb1ap at ripples 0.01, 0.1, 0.5, 1, 2
  and 3 dB, and besselap(norm='mag'); each as poles [[re, im], ...] and gain k;
* minimum orders and natural frequencies from buttord and cheb1ord (analog=True) for low-pass,
  high-pass and band-pass specifications of our own (numbers chosen for this project);
* complete analog designs (butter, cheby1, bessel norm='mag'; lp, hp, bp) as zeros/poles in
  rad/s and H(j*2*pi*f) from freqs_zpk at log-spaced frequencies, to check the transforms and
  the section cascade.

The scipy, numpy and Python versions are recorded in the file. Run with
`python3 tests/reference/make_reference.py`; the Rust tests read the committed JSON and do not
need scipy.
"""

import json
import math
import pathlib
import platform

import numpy as np
import scipy
from scipy import signal

ORDERS = range(1, 21)
RIPPLES_DB = [0.01, 0.1, 0.5, 1.0, 2.0, 3.0]

# Our own specifications: (class, wp, ws, gpass_db, gstop_db). Frequencies are in Hz; the analog
# order formulas depend only on frequency ratios, so scipy's rad/s convention does not matter.
SPECS = [
    ("lp", 1000.0, 2500.0, 1.0, 40.0),
    ("lp", 200.0, 300.0, 0.5, 60.0),
    ("lp", 3400.0, 8000.0, 3.0, 48.0),
    ("lp", 10.0, 40.0, 0.25, 30.0),
    ("lp", 50e3, 120e3, 2.0, 70.0),
    ("lp", 800.0, 1000.0, 1.0, 50.0),
    ("lp", 20e3, 24e3, 0.1, 80.0),  # Butterworth needs far more than order 20
    ("hp", 300.0, 100.0, 1.0, 30.0),
    ("hp", 20.0, 8.0, 0.5, 45.0),
    ("hp", 5000.0, 2000.0, 3.0, 60.0),
    ("hp", 1000.0, 700.0, 0.2, 35.0),
    ("hp", 80.0, 20.0, 1.5, 55.0),
    ("bp", [2000.0, 20e3], [800.0, 45e3], 1.0, 40.0),
    ("bp", [900.0, 1100.0], [700.0, 1500.0], 0.5, 30.0),
    ("bp", [300.0, 3400.0], [100.0, 8000.0], 2.0, 50.0),
    ("bp", [10e3, 12e3], [9e3, 14e3], 1.0, 35.0),
    ("bp", [45.0, 55.0], [30.0, 90.0], 3.0, 25.0),
    ("bp", [1000.0, 4000.0], [600.0, 5000.0], 0.3, 45.0),
]


# Complete designs of our own: (family, class, N, edges_hz, ripple_db). For bp, N is scipy's
# prototype order and the edges are the band edges the prototype's 1 rad/s maps to.
DESIGNS = [
    ("butterworth", "lp", 5, [1000.0], None),
    ("chebyshev", "lp", 4, [2000.0], 1.0),
    ("bessel", "lp", 6, [500.0], None),
    ("chebyshev", "lp", 20, [3000.0], 3.0),
    ("butterworth", "hp", 3, [100.0], None),
    ("chebyshev", "hp", 5, [10e3], 0.5),
    ("bessel", "hp", 4, [50.0], None),
    ("butterworth", "bp", 3, [900.0, 1100.0], None),
    ("chebyshev", "bp", 4, [300.0, 3400.0], 0.1),
    ("bessel", "bp", 2, [2000.0, 20e3], None),
    ("butterworth", "bp", 1, [100.0, 1000.0], None),  # wide: the real pole gives two real poles
    ("butterworth", "bp", 10, [1000.0, 1200.0], None),
]


def design_json(family, cls, n, edges_hz, ripple_db):
    btype = {"lp": "lowpass", "hp": "highpass", "bp": "bandpass"}[cls]
    wn = [2 * math.pi * f for f in edges_hz]
    wn = wn[0] if len(wn) == 1 else wn
    if family == "butterworth":
        z, p, k = signal.butter(n, wn, btype, analog=True, output="zpk")
    elif family == "chebyshev":
        z, p, k = signal.cheby1(n, ripple_db, wn, btype, analog=True, output="zpk")
    else:
        z, p, k = signal.bessel(n, wn, btype, analog=True, output="zpk", norm="mag")
    centre = math.sqrt(edges_hz[0] * edges_hz[-1])
    freqs_hz = np.logspace(math.log10(centre / 100), math.log10(centre * 100), 41)
    _, h = signal.freqs_zpk(z, p, k, worN=2 * math.pi * freqs_hz)
    return {
        "family": family,
        "class": cls,
        "order": n,
        "edges_hz": edges_hz,
        "ripple_db": ripple_db,
        "zeros": poles_json(z),
        "poles": poles_json(p),
        "k": float(k),
        "freqs_hz": freqs_hz.tolist(),
        "h": poles_json(h),
    }


def poles_json(p):
    return [[float(np.real(x)), float(np.imag(x))] for x in p]


def continuous_order(kind, cls, wp, ws, gpass, gstop):
    """The real-valued order before ceil(), to keep our specs away from integer borders."""
    if cls == "lp":
        nat = ws / wp
    elif cls == "hp":
        nat = wp / ws
    else:
        ws = np.asarray(ws)
        nat = np.min(np.abs((ws ** 2 - wp[0] * wp[1]) / (ws * (wp[0] - wp[1]))))
    g_stop = 10 ** (0.1 * gstop)
    g_pass = 10 ** (0.1 * gpass)
    if kind == "butter":
        return math.log10((g_stop - 1) / (g_pass - 1)) / (2 * math.log10(nat))
    return math.acosh(math.sqrt((g_stop - 1) / (g_pass - 1))) / math.acosh(nat)


def main():
    out = {
        "generator": "tests/reference/make_reference.py",
        "scipy_version": scipy.__version__,
        "numpy_version": np.__version__,
        "python_version": platform.python_version(),
        "butterworth": [],
        "chebyshev": [],
        "bessel_mag": [],
        "buttord": [],
        "cheb1ord": [],
        "designs": [design_json(*d) for d in DESIGNS],
    }
    for n in ORDERS:
        _, p, k = signal.buttap(n)
        out["butterworth"].append({"order": n, "poles": poles_json(p), "k": float(k)})
        _, p, k = signal.besselap(n, norm="mag")
        out["bessel_mag"].append({"order": n, "poles": poles_json(p), "k": float(k)})
        for rp in RIPPLES_DB:
            _, p, k = signal.cheb1ap(n, rp)
            out["chebyshev"].append(
                {"order": n, "ripple_db": rp, "poles": poles_json(p), "k": float(k)}
            )
    for cls, wp, ws, gpass, gstop in SPECS:
        for kind, fn, key in [("butter", signal.buttord, "buttord"),
                              ("cheby", signal.cheb1ord, "cheb1ord")]:
            n, wn = fn(wp, ws, gpass, gstop, analog=True)
            real_n = continuous_order(kind, cls, wp, ws, gpass, gstop)
            margin = abs(real_n - round(real_n))
            # A spec whose real-valued order sits on an integer would make the comparison depend on
            # the last bit of pow/log; ours are chosen away from that.
            assert margin > 1e-6, (cls, wp, ws, gpass, gstop, kind, real_n)
            assert n == math.ceil(real_n)
            out[key].append({
                "class": cls,
                "wp": wp,
                "ws": ws,
                "gpass_db": gpass,
                "gstop_db": gstop,
                "order": int(n),
                "order_real": real_n,
                "wn": np.atleast_1d(wn).astype(float).tolist(),
            })
    path = pathlib.Path(__file__).with_name("synthesis_reference.json")
    path.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {path} with scipy {scipy.__version__}")
    for key in ("buttord", "cheb1ord"):
        for row in out[key]:
            print(key, row["class"], row["wp"], row["ws"], row["order"], round(row["order_real"], 4))


if __name__ == "__main__":
    main()
