#!/usr/bin/env python3
"""The command-line sweep against scipy, in the same minutes: `rolloff sweep --points 100000` of a
20th-order Butterworth low-pass at 1 kHz (`?v=2&order=20&fc=1k`, the board as built: rounded
parts, op-amp model, one banded factorization per point giving H and its slope) against
scipy.signal.freqs_zpk of the ideal filter (scipy.signal.butter(20, 2*pi*1000, analog=True,
output='zpk')) on the same 100,000 frequencies, read back from the sweep's own output.

Both are timed alternately REPEATS times and the medians printed: for scipy the call alone
(import and filter design excluded); for rolloff the whole command (start-up, design, the sweep
and its CSV) as wall time and as CPU time (user + system, which a busy machine inflates less;
scipy's CPU time is the process time of the call), the ratios wall to wall and CPU to CPU.
Needs the release binary (cargo build --release).
"""
import os
import statistics
import subprocess
import time

import numpy as np
from scipy import signal

LINK = "?v=2&order=20&fc=1k"
POINTS = 100000
REPEATS = 5


def sweep_once(binary, keep=False):
    """Wall and CPU seconds of one `rolloff sweep`, and its output when `keep`."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([binary, "sweep", LINK, "--points", str(POINTS)],
                            stdout=subprocess.PIPE if keep else subprocess.DEVNULL)
    out = proc.stdout.read() if keep else None
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    if status != 0:
        raise SystemExit(f"rolloff sweep failed: status {status}")
    return wall, usage.ru_utime + usage.ru_stime, out


def main():
    binary = os.path.join(os.path.dirname(__file__), "..", "target", "release", "rolloff")
    if not os.path.exists(binary):
        raise SystemExit("build the release binary first: cargo build --release")
    _, _, out = sweep_once(binary, keep=True)
    rows = out.decode().splitlines()[1:]
    f_hz = np.array([float(r.split(",")[0]) for r in rows])
    assert len(f_hz) == POINTS, len(f_hz)
    z, p, k = signal.butter(20, 2 * np.pi * 1000.0, analog=True, output="zpk")
    w = 2 * np.pi * f_hz
    signal.freqs_zpk(z, p, k, worN=w)  # warm-up
    scipy_t, scipy_cpu, walls, cpus = [], [], [], []
    for _ in range(REPEATS):
        t0, c0 = time.perf_counter(), time.process_time()
        signal.freqs_zpk(z, p, k, worN=w)
        scipy_t.append(time.perf_counter() - t0)
        scipy_cpu.append(time.process_time() - c0)
        wall, cpu, _ = sweep_once(binary)
        walls.append(wall)
        cpus.append(cpu)
    s, s_cpu = statistics.median(scipy_t), statistics.median(scipy_cpu)
    wall, cpu = statistics.median(walls), statistics.median(cpus)
    print(f"scipy.signal.freqs_zpk, 20th-order Butterworth, {POINTS} points: {s * 1e3:.2f} ms "
          f"wall, {s_cpu * 1e3:.2f} ms CPU (median of {REPEATS})")
    print(f"rolloff sweep {LINK} --points {POINTS} (median of {REPEATS}): {wall:.3f} s wall "
          f"= {wall / s:.1f}x scipy, {cpu:.3f} s CPU = {cpu / s_cpu:.1f}x scipy's CPU")


if __name__ == "__main__":
    main()
