"""Benchmark of the SRS core: qualplan.dynamics.srs against pyyeti.srs.srs, one run.

Run:  .venv/bin/python benchmarks/bench_srs.py [--samples 1000000] [--freqs 100]

Case of the issue: 1 M samples x 100 natural frequencies (maximax absolute
acceleration, Q = 10). fs = 100 kHz (10 s record), fn log-spaced 10 Hz - 10 kHz
(fs/fn >= 10, so pyyeti's resampling is not triggered with rolloff=None).
Every timing is the best of `--repeat` runs after one warm-up run (numba
compilation is reported separately). Peers are measured in the same process.
"""

from __future__ import annotations

import argparse
import os
import platform
import time
import tracemalloc

import numpy as np
import scipy
from scipy import signal

from qualplan.dynamics import sdof_filter
from qualplan.dynamics import srs as qsrs
from qualplan.dynamics.shock_synthesis import synthesize_shock


def best_of(fn, repeat):
    fn()  # warm-up
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--freqs", type=int, default=100)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()

    rng = np.random.default_rng(0)
    dt = 1e-5
    n = args.samples
    t = np.arange(n) * dt
    # a decaying random shock followed by quiet: realistic amplitude structure
    x = rng.standard_normal(n) * 100.0 * np.exp(-t / (0.3 * n * dt))
    fn = np.geomspace(10.0, 10000.0, args.freqs)

    print(f"machine: {platform.processor() or platform.machine()}, {os.cpu_count()} cores, "
          f"python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}")
    print(f"case: {n} samples x {fn.size} natural frequencies, Q = 10, maximax abs. accel.")

    t0 = time.perf_counter()
    qsrs.srs(np.zeros(1000), dt, fn[:2])
    print(f"first call (numba compile or cache load): {time.perf_counter() - t0:.2f} s")

    t_q, ours = best_of(lambda: qsrs.srs(x, dt, fn), args.repeat)
    print(f"qualplan srs (numba, parallel over fn)            : {t_q:8.3f} s")

    tracemalloc.start()
    qsrs.srs(x, dt, fn)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"qualplan srs peak extra memory (tracemalloc)       : {peak / 1e6:8.1f} MB")

    b, a = sdof_filter.coefficients(fn, 10.0, dt)

    def lfilter_loop():
        out = np.empty(fn.size)
        for i in range(fn.size):
            out[i] = np.abs(signal.lfilter(b[i], a[i], x)).max()
        return out

    t_l, lf = best_of(lfilter_loop, 1)
    print(f"scipy.signal.lfilter loop over fn (same coeffs)    : {t_l:8.3f} s "
          f"(primary only; alternative kernel considered)")

    try:
        from pyyeti import srs as psrs
    except ImportError:  # pragma: no cover
        print("pyyeti not installed: no reference timing")
        return
    import pyyeti

    def py_none_auto():
        return psrs.srs(x, 1 / dt, fn, 10.0, rolloff=None, time="total", parallel="auto")

    def py_none_no():
        return psrs.srs(x, 1 / dt, fn, 10.0, rolloff=None, time="total", parallel="no")

    def py_default():
        return psrs.srs(x, 1 / dt, fn, 10.0, time="total")

    t_pa, ref = best_of(py_none_auto, args.repeat)
    print(f"pyyeti {pyyeti.__version__} srs rolloff=None, parallel='auto'     : {t_pa:8.3f} s")
    t_pn, _ = best_of(py_none_no, 1)
    print(f"pyyeti srs rolloff=None, parallel='no'             : {t_pn:8.3f} s")
    t_pd, _ = best_of(py_default, 1)
    print(f"pyyeti srs defaults (lanczos upsampling to ppc 12) : {t_pd:8.3f} s")
    dev = np.max(np.abs(ours / ref - 1))
    print(f"max relative difference qualplan vs pyyeti (same settings): {dev:.2e}")
    print(f"speed ratio pyyeti(parallel auto) / qualplan       : {t_pa / t_q:8.1f} x")
    print(f"speed ratio pyyeti(parallel no) / qualplan         : {t_pn / t_q:8.1f} x")
    ratio = min(t_pa, t_pn) / t_q
    print(f"speed ratio, fastest pyyeti setting / qualplan     : {ratio:8.1f} x")
    print(f"goal: under 1 s -> {'met' if t_q < 1 else 'NOT met'}; "
          f">= 2x pyyeti -> {'met' if ratio >= 2 else 'NOT met'}")
    print(f"load average during the run: {os.getloadavg()[0]:.2f}")

    # Synthesis (not a goal of the issue; measured for the method note)
    target = qsrs.SrsProfile([100.0, 2000.0, 10000.0], [30.0, 1000.0, 1000.0])
    t0 = time.perf_counter()
    res = synthesize_shock(target, seed=0)
    print(f"synthesis, pyroshock target 100 Hz-10 kHz, 1/12 oct ({res.freq_hz.size} wavelets,"
          f" {res.accel_g.size} samples): {time.perf_counter() - t0:.2f} s,"
          f" {res.iterations} iterations, max error {res.max_error_db:.2f} dB")


if __name__ == "__main__":
    main()
