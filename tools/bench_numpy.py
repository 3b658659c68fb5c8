#!/usr/bin/env python3
"""Vectorised numpy version of the tolerance-study kernel, for comparison with
benches/montecarlo.rs: an 8th-order Butterworth low-pass as four unity-gain Sallen-Key stages
(1 kHz), 200 log-spaced frequencies from 10 Hz to 100 kHz, Gaussian parts (1 % resistors, 5 %
capacitors, tolerance = 3 sigma). The textbook computation: per run and stage
w0 = 1/sqrt(R1 R2 C1 C2), Q = sqrt(R1 R2 C1 C2) / (C2 (R1 + R2)) (ideal op amp), then
|H|^2 = w0^4 / ((w0^2 - w^2)^2 + (w w0 / Q)^2) per frequency, multiplied over the stages
(magnitude only, no complex numbers). Prints stage-evaluations per second
(runs x points x stages / s).

Side by side: when the release binary `target/release/rolloff` exists (cargo build --release), the
script also times a whole `rolloff spread` of the same design with 20,000 runs (start-up, design,
200-point study and statistics included) right after the numpy kernel, so both figures come from
the same minute of a shared machine. The Rust kernel's own figure comes from
`cargo bench --bench montecarlo`.
"""
import os
import subprocess
import time

import numpy as np

N_POINTS = 200
N_STAGES = 4
RUNS = 20000
CHUNK = 2000


def stage_values(f0, q, r=10e3):
    w0 = 2 * np.pi * f0
    ratio = 4 * q * q  # C1/C2 for equal resistors
    c2 = 1.0 / (w0 * r * np.sqrt(ratio))
    return r, r, ratio * c2, c2


def main():
    qs = [1.0 / (2.0 * np.sin((2 * k - 1) * np.pi / 16.0)) for k in range(1, 5)]
    nominal = np.array([stage_values(1000.0, q) for q in qs])  # (stages, 4)
    w = 2 * np.pi * np.logspace(1, 5, N_POINTS)
    w2 = w * w
    rng = np.random.default_rng(1)
    sig = np.array([0.01, 0.01, 0.05, 0.05]) / 3.0
    total = 0.0
    done = 0
    env_min = np.full(N_POINTS, np.inf)
    env_max = np.zeros(N_POINTS)
    while done < RUNS:
        n = min(CHUNK, RUNS - done)
        z = rng.standard_normal((n, N_STAGES, 4))
        t0 = time.perf_counter()
        vals = nominal[None, :, :] * (1.0 + sig[None, None, :] * z)
        r1, r2, c1, c2 = vals[..., 0], vals[..., 1], vals[..., 2], vals[..., 3]
        p = r1 * r2 * c1 * c2
        w0sq = 1.0 / p  # (n, stages)
        w0q = np.sqrt(w0sq) / (np.sqrt(p) / (c2 * (r1 + r2)))  # w0 / Q
        a = w0sq[..., None] - w2[None, None, :]
        b = w[None, None, :] * w0q[..., None]
        h2 = (w0sq[..., None] ** 2) / (a * a + b * b)  # (n, stages, points)
        h2 = h2.prod(axis=1)
        env_min = np.minimum(env_min, h2.min(axis=0))
        env_max = np.maximum(env_max, h2.max(axis=0))
        total += time.perf_counter() - t0
        done += n
    evals = RUNS * N_POINTS * N_STAGES
    print(f"numpy {np.__version__}: {RUNS} runs x {N_POINTS} points x {N_STAGES} stages "
          f"in {total:.3f} s = {evals / total:.3e} stage-evaluations/s")
    binary = os.path.join(os.path.dirname(__file__), "..", "target", "release", "rolloff")
    if os.path.exists(binary):
        link = ("v=1&resp=lp&family=butterworth&order=8&fc=1000"
                "&fpass=800&apass=1&fstop=3000&astop=60")
        t0 = time.perf_counter()
        subprocess.run([binary, "spread", link, "--runs", str(RUNS), "--seed", "1",
                        "--format", "json"], check=True, stdout=subprocess.DEVNULL)
        whole = time.perf_counter() - t0
        print(f"rolloff spread, {RUNS} runs, whole command: {whole:.3f} s "
              f"({total / whole:.1f}x faster than the numpy kernel alone)")


if __name__ == "__main__":
    main()
