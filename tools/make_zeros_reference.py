#!/usr/bin/env python3
"""Writes tests/reference/zeros_reference.json from scipy.signal.

Poles, zeros and the gain of analog filters (`output='zpk'`, `analog=True`) of the families with
jω-axis zeros (cheby2, ellip) for low-pass, high-pass, band-pass and band-stop, and of butter and
cheby1 for band-stop, at several ripple and stopband-depth settings; and the minimum orders of
buttord, cheb1ord, cheb2ord and ellipord (`analog=True`) for masks of our own, band-stop included.
Frequencies are given to scipy in rad/s (2π times the Hz values recorded). Run from the repository
root: `python3 tools/make_zeros_reference.py`. tests/zeros_synthesis.rs reads the file.
"""
import json
import math

import numpy as np
import scipy
from scipy import signal

TWO_PI = 2.0 * math.pi
FC_HZ = 1000.0
BW_HZ = 500.0


def roots(values):
    return [[float(v.real), float(v.imag)] for v in np.atleast_1d(values)]


def band_edges(w0, bw):
    hi = bw / 2.0 + math.sqrt(bw * bw / 4.0 + w0 * w0)
    return [w0 * w0 / hi, hi]


def design(kind, btype, order, rp, rs):
    w0 = TWO_PI * FC_HZ
    if btype in ("bandpass", "bandstop"):
        wn = band_edges(w0, TWO_PI * BW_HZ)
        n = order // 2
    else:
        wn = w0
        n = order
    if kind == "butter":
        z, p, k = signal.butter(n, wn, btype, analog=True, output="zpk")
    elif kind == "cheby1":
        z, p, k = signal.cheby1(n, rp, wn, btype, analog=True, output="zpk")
    elif kind == "cheby2":
        z, p, k = signal.cheby2(n, rs, wn, btype, analog=True, output="zpk")
    else:
        z, p, k = signal.ellip(n, rp, rs, wn, btype, analog=True, output="zpk")
    # |H| at a few frequencies around the band, for the gain check.
    freqs_hz = [FC_HZ * f for f in (0.05, 0.3, 0.77, 1.0, 1.3, 2.9, 17.0)]
    _, h = signal.freqs_zpk(z, p, k, [TWO_PI * f for f in freqs_hz])
    return {
        "family": kind,
        "resp": {"lowpass": "lp", "highpass": "hp", "bandpass": "bp", "bandstop": "bs"}[btype],
        "order": order,
        "ripple_db": rp,
        "astop_db": rs,
        "fc_hz": FC_HZ,
        "bw_hz": BW_HZ if btype in ("bandpass", "bandstop") else None,
        "zeros": roots(z),
        "poles": roots(p),
        "gain": float(k),
        "freqs_hz": freqs_hz,
        "magnitude": [float(abs(v)) for v in h],
    }


def cases():
    out = []
    depths = [30.0, 40.0, 60.0, 80.0]
    ellip_settings = [(0.1, 40.0), (0.5, 60.0), (1.0, 30.0), (1.0, 80.0), (3.0, 80.0)]
    for btype in ("lowpass", "highpass", "bandpass", "bandstop"):
        orders = range(2, 21, 2) if btype in ("bandpass", "bandstop") else range(1, 21)
        for order in orders:
            for rs in depths:
                out.append(design("cheby2", btype, order, None, rs))
            for rp, rs in ellip_settings:
                out.append(design("ellip", btype, order, rp, rs))
            if btype == "bandstop":
                out.append(design("butter", btype, order, None, None))
                for rp in (0.1, 0.5, 1.0, 3.0):
                    out.append(design("cheby1", btype, order, rp, None))
    return out


# Masks of our own: (resp, passband edges Hz, stopband edges Hz, apass dB, astop dB).
MASKS = [
    ("lp", 1000.0, 1200.0, 1.0, 80.0),
    ("lp", 1000.0, 2000.0, 0.5, 60.0),
    ("lp", 20e3, 24e3, 0.1, 96.0),
    ("lp", 50.0, 400.0, 3.0, 40.0),
    ("hp", 300.0, 100.0, 1.0, 40.0),
    ("hp", 5e3, 4e3, 0.25, 70.0),
    ("bp", [2e3, 20e3], [1e3, 30e3], 1.0, 40.0),
    ("bp", [900.0, 1100.0], [700.0, 1500.0], 0.5, 50.0),
    ("bs", [40.0, 62.5], [48.0, 52.0], 1.0, 40.0),
    ("bs", [500.0, 2000.0], [800.0, 1200.0], 0.5, 30.0),
    ("bs", [100.0, 1e4], [900.0, 1100.0], 2.0, 60.0),
    ("bs", [3e3, 5e3], [3.8e3, 4.1e3], 0.2, 45.0),
    ("bs", [55.0, 66.0], [59.0, 61.0], 3.0, 20.0),
]


def orders():
    out = []
    for resp, wp, ws, gpass, gstop in MASKS:
        wp_rad = np.multiply(TWO_PI, wp)
        ws_rad = np.multiply(TWO_PI, ws)
        row = {"resp": resp, "pass_hz": wp, "stop_hz": ws, "apass_db": gpass, "astop_db": gstop}
        for name, fn in (("butterworth", signal.buttord), ("chebyshev", signal.cheb1ord),
                         ("inverse-chebyshev", signal.cheb2ord), ("elliptic", signal.ellipord)):
            n, _ = fn(wp_rad, ws_rad, gpass, gstop, analog=True)
            row[name] = int(n)
        out.append(row)
    return out


def main():
    data = {
        "source": "scipy.signal cheby2/ellip/butter/cheby1 (analog, zpk) and "
                  "buttord/cheb1ord/cheb2ord/ellipord (analog=True)",
        "scipy_version": scipy.__version__,
        "generator": "tools/make_zeros_reference.py",
        "filters": cases(),
        "orders": orders(),
    }
    with open("tests/reference/zeros_reference.json", "w") as f:
        json.dump(data, f, indent=0)
        f.write("\n")


if __name__ == "__main__":
    main()
