"""Benchmarks of the random-vibration core (run: .venv/bin/python benchmarks/bench_psd.py).

Cases (each run in its own process under /usr/bin/time -v for its peak memory):

- welch:     qualplan.dynamics.signal.welch_psd of a 10-minute record at 20 kHz (12 M samples)
- maximax:   qualplan.dynamics.signal.maximax_psd of the same record (1 s windows, 50 %)
- scipy:     peer, scipy.signal.welch on the same record with the same segment (65536)
- simplify:  qualplan.dynamics.psd.simplify_report of a 4000-line measured envelope to 12 points
- simplify_fine: the same with a 2x finer first search grid (quality reference, not a goal)

Usage: ``bench_psd.py`` runs all cases and prints a table; ``bench_psd.py CASE`` runs one
case in-process and prints its timing.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

FS = 20_000.0
N = 12_000_000


def _record() -> np.ndarray:
    return np.random.default_rng(0).standard_normal(N) * 3.0


def _envelope_4000():
    """Max of three invented 'measured' response PSDs on 4000 lines (20-2000 Hz)."""
    from qualplan.dynamics import psd

    f = np.linspace(20.0, 2000.0, 4000)
    base = psd.asd_at([20, 50, 800, 2000], [0.026, 0.16, 0.16, 0.026], f)
    out = np.zeros_like(f)
    for seed in range(3):
        rng = np.random.default_rng(seed)
        g = 0.3 * base
        for fn, q, w in ((150, 15, 0.5), (420, 20, 0.3), (900, 25, 0.2), (1500, 10, 0.1)):
            r = f / (fn * rng.uniform(0.95, 1.05))
            g = g + w * base * (1 + (r / q) ** 2) / ((1 - r ** 2) ** 2 + (r / q) ** 2)
        out = np.maximum(out, g * rng.chisquare(64, f.size) / 64)
    return f, out


def run_case(case: str) -> None:
    if case in ("welch", "maximax", "scipy"):
        x = _record()
        if case == "welch":
            from qualplan.dynamics.signal import welch_psd

            t, c = time.perf_counter(), time.process_time()
            r = welch_psd(x, FS)
            dt, dc = time.perf_counter() - t, time.process_time() - c
            print(f"RESULT {case} {dt:.3f} s wall {dc:.3f} s cpu  nperseg={r.nperseg} "
                  f"segments={r.n_segments} dof={r.dof:.0f} eps={r.random_error:.3f}")
        elif case == "maximax":
            from qualplan.dynamics.signal import maximax_psd

            t, c = time.perf_counter(), time.process_time()
            r = maximax_psd(x, FS, window_s=1.0)
            dt, dc = time.perf_counter() - t, time.process_time() - c
            print(f"RESULT {case} {dt:.3f} s wall {dc:.3f} s cpu  nperseg={r.nperseg} "
                  f"windows={r.n_windows} segments/window={r.segments_per_window} "
                  f"eps={r.random_error:.3f}")
        else:
            import scipy.signal

            t, c = time.perf_counter(), time.process_time()
            scipy.signal.welch(x, FS, nperseg=65536, noverlap=32768)
            dt, dc = time.perf_counter() - t, time.process_time() - c
            print(f"RESULT {case} {dt:.3f} s wall {dc:.3f} s cpu  nperseg=65536 (peer)")
        return
    if case in ("simplify", "simplify_fine"):
        from qualplan.dynamics import _loglog, psd

        f, g = _envelope_4000()
        _loglog.simplify_above(f[:50], g[:50], 4)  # import scipy.optimize/spatial once
        t, c = time.perf_counter(), time.process_time()
        if case == "simplify":
            r = psd.simplify_report(f, g, 12)
            ex, n = r.excess_db, r.freq_hz.size
        else:
            fo, ao = _loglog.simplify_above(f, g, 12, n_candidates=240, n_levels=40)
            ex, n = 20 * np.log10(psd.grms(fo, ao) / psd.grms(f, g)), fo.size
        dt, dc = time.perf_counter() - t, time.process_time() - c
        print(f"RESULT {case} {dt:.3f} s wall {dc:.3f} s cpu  points={n} excess={ex:.3f} dB")
        return
    raise SystemExit(f"unknown case {case!r}")


def main() -> None:
    here = Path(__file__).resolve()
    rows = []
    for case in ("welch", "maximax", "scipy", "simplify", "simplify_fine"):
        p = subprocess.run(["/usr/bin/time", "-v", sys.executable, str(here), case],
                           capture_output=True, text=True, check=True)
        res = next(ln for ln in p.stdout.splitlines() if ln.startswith("RESULT"))
        rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", p.stderr).group(1))
        rows.append((case, res.split(maxsplit=2)[2], rss / 1024))
    print(f"load average before: {os.getloadavg()[0]:.2f} (2 cores)")
    print(f"{'case':<14} {'peak RSS':>9}  result")
    for case, res, mb in rows:
        print(f"{case:<14} {mb:7.0f} MB  {res}")
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    if len(sys.argv) > 1:
        run_case(sys.argv[1])
    else:
        main()
