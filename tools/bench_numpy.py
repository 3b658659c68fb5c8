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
script also times whole `rolloff spread` commands of the same design with exact parts
(`?v=2&order=8&fc=1k&rser=exact&cser=exact`) and 20,000 runs (start-up, design, the 241-point
study, statistics and the JSON included), alternating with the numpy kernel, so both figures
come from the same minutes of a shared machine. The numpy figure is the median of warm passes
(the first pass pays numpy's first-touch page faults and reads about 2x low); the command's is
the median wall time and the median CPU time (user + system, which a busy machine inflates
less; the ratios are wall to wall and CPU to CPU). The Rust kernel's own figure comes from `cargo bench --bench montecarlo`.
"""
import os
import statistics
import subprocess
import time

import numpy as np

N_POINTS = 200
N_STAGES = 4
RUNS = 20000
CHUNK = 2000
REPEATS = 5
LINK = "?v=2&order=8&fc=1k&rser=exact&cser=exact"


def stage_values(f0, q, r=10e3):
    w0 = 2 * np.pi * f0
    ratio = 4 * q * q  # C1/C2 for equal resistors
    c2 = 1.0 / (w0 * r * np.sqrt(ratio))
    return r, r, ratio * c2, c2


def numpy_pass(nominal, w, w2, sig):
    """One pass of RUNS runs in chunks; returns the wall and CPU seconds spent in the kernel."""
    rng = np.random.default_rng(1)
    total = 0.0
    cpu = 0.0
    done = 0
    env_min = np.full(N_POINTS, np.inf)
    env_max = np.zeros(N_POINTS)
    while done < RUNS:
        n = min(CHUNK, RUNS - done)
        z = rng.standard_normal((n, N_STAGES, 4))
        t0 = time.perf_counter()
        c0 = time.process_time()
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
        cpu += time.process_time() - c0
        done += n
    return total, cpu


def spread_once(binary):
    """Wall and CPU seconds of one whole `rolloff spread` command."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([binary, "spread", LINK, "--runs", str(RUNS), "--seed", "1",
                             "--format", "json"], stdout=subprocess.DEVNULL)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    if status != 0:
        raise SystemExit(f"rolloff spread failed: status {status}")
    return wall, usage.ru_utime + usage.ru_stime


def main():
    qs = [1.0 / (2.0 * np.sin((2 * k - 1) * np.pi / 16.0)) for k in range(1, 5)]
    nominal = np.array([stage_values(1000.0, q) for q in qs])  # (stages, 4)
    w = 2 * np.pi * np.logspace(1, 5, N_POINTS)
    w2 = w * w
    sig = np.array([0.01, 0.01, 0.05, 0.05]) / 3.0
    binary = os.path.join(os.path.dirname(__file__), "..", "target", "release", "rolloff")
    have_binary = os.path.exists(binary)
    numpy_pass(nominal, w, w2, sig)  # warm-up: first-touch page faults
    kernel, kernel_cpu, walls, cpus = [], [], [], []
    for _ in range(REPEATS):
        k_wall, k_cpu = numpy_pass(nominal, w, w2, sig)
        kernel.append(k_wall)
        kernel_cpu.append(k_cpu)
        if have_binary:
            wall, cpu = spread_once(binary)
            walls.append(wall)
            cpus.append(cpu)
    evals = RUNS * N_POINTS * N_STAGES
    k, k_cpu = statistics.median(kernel), statistics.median(kernel_cpu)
    print(f"numpy {np.__version__}: {RUNS} runs x {N_POINTS} points x {N_STAGES} stages "
          f"in {k:.4f} s wall, {k_cpu:.4f} s CPU (median of {REPEATS} warm passes) = "
          f"{evals / k:.3e} stage-evaluations/s")
    if have_binary:
        wall, cpu = statistics.median(walls), statistics.median(cpus)
        print(f"rolloff spread {LINK}, {RUNS} runs, whole command (median of {REPEATS}): "
              f"{wall:.4f} s wall ({k / wall:.2f}x faster than the numpy kernel alone), "
              f"{cpu:.4f} s CPU ({k_cpu / cpu:.2f}x the kernel's CPU)")


if __name__ == "__main__":
    main()
