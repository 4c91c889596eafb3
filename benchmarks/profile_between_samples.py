"""Cost of the parts of the between-sample SRS methods (issue 16), one process.

Run:  nice -n 10 .venv/bin/python benchmarks/profile_between_samples.py

Same record as bench_between_samples.py (1 M samples, fs 100 kHz, 100 fn 10 Hz -
20 kHz). Prints, per part, the best wall time of 3 runs after a warm-up and the CPU
seconds (process time, every thread) of that run, and the load average.
"""

from __future__ import annotations

import os
import time
import warnings

import numpy as np

from qualplan.dynamics import sdof_filter as F
from qualplan.dynamics import sdof_hold as H
from qualplan.dynamics import srs as S


def timed(label, fn, repeat=3):
    fn()
    runs = []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        runs.append((time.perf_counter() - t0, time.process_time() - c0))
    wall, cpu = min(runs)
    print(f"{label:44s} wall {wall:6.3f} s   CPU {cpu:6.3f} s")


def main() -> None:
    warnings.simplefilter("ignore")
    fs, n = 100_000.0, 1_000_000
    dt = 1.0 / fs
    t = np.arange(n) / fs
    x = np.random.default_rng(2).standard_normal(n) * np.exp(-t / (0.2 * t[-1])) * 50.0
    fn = np.geomspace(10.0, fs / 5, 100)
    print(f"load average {os.getloadavg()[0]:.2f} (1 min) at start")
    xp = np.concatenate([[0.0], x, [0.0]])
    timed("cubic: limited slopes", lambda: H.limited_slopes(xp))
    m0, m1 = H.limited_slopes(xp)
    cf = H.cubic_hold_coefficients(fn, 10.0, dt)
    ne = S._residual_samples(fn, 10.0, dt)
    timed("cubic kernel, peaks between samples, 100 fn",
          lambda: H.run_peaks(xp, m0, m1, cf, kind=0, n_end=n, n_extra=ne - 1))
    timed("cubic kernel, peaks at samples, 100 fn",
          lambda: H.run_peaks(xp, m0, m1, cf, kind=0, n_end=n, n_extra=ne - 1,
                              between=False))
    b, a = F.coefficients(fn, 10.0, dt)
    timed("ramp kernel, 100 fn", lambda: F.run_extremes(x, b, a, ne))
    timed("FFT interpolation x4", lambda: S.fft_upsample(x, 4))
    timed("step and kink detectors", lambda: S.record_model(x))
    xs = F.sinc2_preemphasis(x)
    timed("vertex kernel, 100 fn at fs", lambda: F.run_vertex_extremes(xs, b, a, n, ne))
    x4 = S.fft_upsample(x, 4)
    b4, a4 = F.coefficients(fn[-10:], 10.0, dt / 4)
    ne4 = S._residual_samples(fn[-10:], 10.0, dt / 4)
    timed("vertex kernel, 10 fn at 4 fs", lambda: F.run_vertex_extremes(x4, b4, a4, x4.size, ne4))
    timed("ramp kernel, 10 fn at 4 fs", lambda: F.run_extremes(x4, b4, a4, ne4))
    for m in ("cubic", "bandlimited", "auto"):
        timed(f"srs method={m}", lambda m=m: S.srs(x, dt, fn, 10.0, method=m))
    print(f"load average {os.getloadavg()[0]:.2f} (1 min) at the end")


if __name__ == "__main__":
    main()
