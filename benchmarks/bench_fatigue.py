"""Benchmarks of rainflow counting and fatigue damage spectra (issue 8).

Run:  .venv/bin/python benchmarks/bench_fatigue.py [--quick]

Measures, in one run and on the same data:
1. rainflow of 10 M samples of white noise: qualplan.dynamics.rainflow.count vs
   pyyeti (numba turning points + C counter), fatpack and the rainflow package;
2. time-domain FDS of 1 M samples x 50 natural frequencies: fatigue.fds_time on
   1 and 2 threads vs SDOF filtering + pyyeti counter + Miner's sum;
3. spectral FDS of a 4000-line PSD at 200 natural frequencies;
4. the first-call cost of the compiled kernels (cold numba cache, warm cache).
Times are the best of several repeats (wall clock, time.perf_counter).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
import warnings
from concurrent.futures import ThreadPoolExecutor

import numpy as np

warnings.simplefilter("ignore")


def best(fun, repeat=3):
    """Best wall time of `repeat` calls; the best CPU time of the calling thread goes to
    CPU[id(fun)] (robust to other jobs on the machine for single-threaded work)."""
    ts, cs = [], []
    out = None
    for _ in range(repeat):
        c = time.thread_time()
        t = time.perf_counter()
        out = fun()
        ts.append(time.perf_counter() - t)
        cs.append(time.thread_time() - c)
    best.last_cpu = min(cs)
    return min(ts), out


def bench_rainflow(n: int, slow_peers: bool):
    import fatpack
    import pyyeti.cyclecount as pyc
    import rainflow as rf_pkg

    from qualplan.dynamics import rainflow

    x = np.random.default_rng(0).standard_normal(n)
    rainflow.count(x[:1000])
    pyc.rainflow(x[:1000][pyc.findap(x[:1000])], use_pandas=False)
    t_ours, c = best(lambda: rainflow.count(x), 5)
    c_ours = best.last_cpu
    n_rev = rainflow.reversals(x).size

    def yeti():
        p = x[pyc.findap(x)]
        return pyc.rainflow(p, use_pandas=False)

    t_yeti, cy = best(yeti, 5)
    c_yeti = best.last_cpu

    def fp():
        rev, _ = fatpack.find_reversals(x, k=2**16)
        return fatpack.find_rainflow_cycles(rev)

    t_fp, _ = best(fp, 1) if slow_peers else (float("nan"), None)
    t_pkg = float("nan")
    if slow_peers:
        t = time.perf_counter()
        cyc = list(rf_pkg.extract_cycles(x))
        t_pkg = time.perf_counter() - t
        assert len(cyc) == c.shape[0]
    print(f"\n1. rainflow, {n:,} samples white noise, {n_rev:,} reversals, {c.shape[0]:,} cycles")
    print(f"   qualplan rainflow.count            {t_ours:7.3f} s   (CPU {c_ours:.3f} s)")
    print(f"   pyyeti findap + rainflow (numba+C) {t_yeti:7.3f} s   ratio {t_yeti / t_ours:5.2f}"
          f"   (CPU {c_yeti:.3f} s, ratio {c_yeti / c_ours:.2f})")
    print(f"   fatpack find_reversals + cycles    {t_fp:7.3f} s   ratio {t_fp / t_ours:5.2f}")
    print(f"   rainflow package extract_cycles    {t_pkg:7.3f} s   ratio {t_pkg / t_ours:5.1f}")
    print(f"   (pyyeti cycles: {cy.shape[0]:,}; its findap uses a tolerance)")


def bench_fds_time(n: int, n_fn: int):
    import pyyeti.cyclecount as pyc
    from scipy.signal import lfilter

    from qualplan.dynamics import fatigue, sdof_filter

    x = np.random.default_rng(1).standard_normal(n)
    dt = 1e-4
    fn = np.geomspace(10, 1000, n_fn)
    q, b = 10.0, 8.0
    fatigue.fds_time(x[:1000], dt, fn[:2], q, b)
    t1, d1 = best(lambda: fatigue.fds_time(x, dt, fn, q, b, workers=1), 5)
    c1 = best.last_cpu
    t2, d2 = best(lambda: fatigue.fds_time(x, dt, fn, q, b, workers=2), 5)
    tr, dr = best(lambda: fatigue.fds_time(x, dt, fn, q, b, workers=2,
                                           interpolate_peaks=False), 5)
    bz, az = sdof_filter.coefficients(fn, q, dt, output="rel_disp")
    scale = (2 * np.pi * fn) ** 2 / 9.80665
    pyc.rainflow(x[:1000][pyc.findap(x[:1000])], use_pandas=False)

    def peer_one(i):
        y = lfilter(bz[i] * scale[i], az[i], x)
        c = pyc.rainflow(y[pyc.findap(y)], use_pandas=False)
        return np.sum(c[:, 2] * c[:, 0] ** b)  # pyyeti returns amplitude, count

    tp1, dp = best(lambda: np.array([peer_one(i) for i in range(n_fn)]), 3)
    cp1 = best.last_cpu
    with ThreadPoolExecutor(2) as ex:
        tp2, _ = best(lambda: np.array(list(ex.map(peer_one, range(n_fn)))), 3)
    err = np.max(np.abs(dr / dp - 1))
    print(f"\n2. time-domain FDS, {n:,} samples x {n_fn} natural frequencies"
          " (10-1000 Hz, fs 10 kHz)")
    print(f"   qualplan fds_time, 1 thread         {t1:7.3f} s   (CPU {c1:.3f} s)")
    print(f"   qualplan fds_time, 2 threads        {t2:7.3f} s")
    print(f"   same, raw sample peaks, 2 threads   {tr:7.3f} s   (max |D/D_peer - 1| {err:.1e})")
    print(f"   peer lfilter + pyyeti + Miner, 1    {tp1:7.3f} s   ratio {tp1 / t1:5.2f}"
          f"   (CPU {cp1:.3f} s, ratio {cp1 / c1:.2f})")
    print(f"   peer, 2 threads                     {tp2:7.3f} s   ratio {tp2 / t2:5.2f}")


def bench_fds_spectral():
    from qualplan.dynamics import fatigue

    f = np.linspace(0.5, 2000, 4000)
    g = 0.04 * (1 + 0.5 * np.sin(f / 10))
    fn = np.geomspace(5, 2000, 200)
    fatigue.fds_random(f, g, 60, fn, 10, 8)
    t, _ = best(lambda: fatigue.fds_random(f, g, 60, fn, 10, 8), 7)
    c = best.last_cpu
    tb, _ = best(lambda: fatigue.fds_random([20, 2000], [0.04, 0.04], 60, fn, 10, 8), 7)
    td, _ = best(lambda: fatigue.fds_random(f, g, 60, fn, 10, 8, method="dirlik"), 7)
    print("\n3. spectral FDS, 200 natural frequencies")
    print(f"   4000-line PSD, narrow band          {t:7.4f} s   (CPU {c:.4f} s)")
    print(f"   4000-line PSD, Dirlik               {td:7.4f} s")
    print(f"   2-breakpoint PSD, narrow band       {tb:7.4f} s")


CODE = """
import time, numpy as np
t = time.perf_counter()
from qualplan.dynamics import rainflow, fatigue
t_imp = time.perf_counter() - t
t = time.perf_counter(); rainflow.count(np.arange(10.0) % 3); t_rf = time.perf_counter() - t
t = time.perf_counter(); fatigue.fds_time(np.sin(np.arange(1000.0)), 1e-3, [10.0], 10, 8)
t_fds = time.perf_counter() - t
print(f"{t_imp:.3f} {t_rf:.3f} {t_fds:.3f}")
"""


def bench_compile():
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        rows = []
        for _ in range(2):
            out = subprocess.run([sys.executable, "-c", CODE], env=env, capture_output=True,
                                 text=True, check=True).stdout.split()
            rows.append([float(v) for v in out])
    print("\n4. first call in a fresh process (import / first rainflow.count / first fds_time)")
    print(f"   cold numba cache: {rows[0][0]:.2f} s / {rows[0][1]:.2f} s / {rows[0][2]:.2f} s")
    print(f"   warm numba cache: {rows[1][0]:.2f} s / {rows[1][1]:.2f} s / {rows[1][2]:.2f} s")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="1 M samples, skip the slow peers")
    a = ap.parse_args()
    print(f"python {sys.version.split()[0]}, numpy {np.__version__}, {os.cpu_count()} cores, "
          f"load average at start {os.getloadavg()[0]:.2f}")
    bench_rainflow(1_000_000 if a.quick else 10_000_000, slow_peers=not a.quick)
    bench_fds_time(1_000_000, 50)
    bench_fds_spectral()
    bench_compile()
    print(f"\nload average at end {os.getloadavg()[0]:.2f} (other jobs on the machine inflate "
          "times, the 2-thread ones most)")


if __name__ == "__main__":
    main()
