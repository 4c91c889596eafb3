"""Speed of the between-sample SRS and band-limited FDS methods (issue 16), one run.

Run:  nice -n 10 .venv/bin/python benchmarks/bench_between_samples.py [--samples 1000000]

1. SRS of 1 M samples x 100 natural frequencies (maximax absolute acceleration,
   Q = 10), fs = 100 kHz, fn log-spaced 10 Hz - 20 kHz (up to fs/5): qualplan
   ``method="cubic"``, ``"bandlimited"`` and ``"auto"`` (the record is smooth
   random, so "auto" takes its band-limited path) against pyyeti.srs.srs with its
   default settings (it upsamples to 12 points per cycle of the highest fn,
   ``rolloff="lanczos"``, ``ppc=12``), in the same process.
2. Time-domain FDS of 1 M samples x 50 fn (10 Hz - 2 kHz, fs = 10 kHz: up to
   fs/5), b = 8: qualplan ``method="bandlimited"`` against scipy lfilter +
   pyyeti findap + rainflow + Miner's sum on the record as given (no
   reconstruction: the peer is the lower-accuracy baseline).
Every timing is the best of `--repeat` runs after one warm-up run; the CPU seconds
(every thread of the process and its worker processes) of that run are printed beside it.
"""

from __future__ import annotations

import argparse
import os
import platform
import time
import warnings

import numpy as np

CPU = {}  # CPU seconds of the best wall-time run, by label


def cpu_s():
    """CPU seconds of this process (every thread) and of its finished children (pyyeti's
    srs runs its fn in worker processes when `parallel="auto"` picks them)."""
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


def best(fn, repeat, label=None):
    fn()
    times = []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), cpu_s()
        out = fn()
        times.append((time.perf_counter() - t0, cpu_s() - c0))
    wall, cpu = min(times)
    if label:
        CPU[label] = cpu
    return wall, out


def bench_srs(n: int, repeat: int):
    import pyyeti.srs as ysrs

    from qualplan.dynamics import srs as qsrs

    fs = 100_000.0
    rng = np.random.default_rng(2)
    t = np.arange(n) / fs
    x = rng.standard_normal(n) * np.exp(-t / (0.2 * t[-1])) * 50.0
    fn = np.geomspace(10.0, fs / 5, 100)
    warnings.simplefilter("ignore")
    out = {}
    for m in ("ramp", "cubic", "bandlimited", "auto"):
        out[m] = best(lambda m=m: qsrs.srs(x, 1 / fs, fn, 10.0, method=m), repeat, m)
    ty, ry = best(lambda: ysrs.srs(x, fs, fn, 10.0, time="total"), repeat, "pyyeti")
    print(f"1. SRS, {n:,} samples x {fn.size} fn (10 Hz - {fs / 5:g} Hz, fs {fs:g} Hz);"
          f" method='auto' reads this record as {qsrs.record_model(x)!r}")
    for m, (tm, r) in out.items():
        print(f"   qualplan srs method={m:<12s} {tm:7.3f} s   pyyeti/qualplan {ty / tm:5.2f}"
              f"   max |SRS/pyyeti - 1| {np.max(np.abs(r / ry - 1)):.3f}"
              f"   CPU {CPU[m]:7.3f} s (pyyeti/qualplan {CPU['pyyeti'] / CPU[m]:5.2f})")
    print(f"   pyyeti srs, default settings    {ty:7.3f} s   CPU {CPU['pyyeti']:7.3f} s")
    print(f"   load average {os.getloadavg()[0]:.2f} (1 min)")


def bench_fds(n: int, repeat: int):
    import pyyeti.cyclecount as pyc
    from scipy.signal import lfilter

    from qualplan.dynamics import fatigue, sdof_filter

    x = np.random.default_rng(1).standard_normal(n)
    dt = 1e-4
    fn = np.geomspace(10, 2000, 50)
    q, b = 10.0, 8.0
    warnings.simplefilter("ignore")
    tq, dq = best(lambda: fatigue.fds_time(x, dt, fn, q, b, method="bandlimited"), repeat,
                  "fds_bl")
    tr, dr = best(lambda: fatigue.fds_time(x, dt, fn, q, b), repeat, "fds_ramp")
    bz, az = sdof_filter.coefficients(fn, q, dt, output="rel_disp")
    scale = (2 * np.pi * fn) ** 2 / 9.80665

    def peer_one(i):
        y = lfilter(bz[i] * scale[i], az[i], x)
        c = pyc.rainflow(y[pyc.findap(y)], use_pandas=False)
        return np.sum(c[:, 2] * c[:, 0] ** b)

    tp, dp = best(lambda: np.array([peer_one(i) for i in range(fn.size)]), max(1, repeat - 1),
                  "peer")
    print(f"\n2. time-domain FDS, {n:,} samples x {fn.size} fn (10 - 2000 Hz, fs 10 kHz), b = 8")
    cp = CPU["peer"]
    print(f"   qualplan fds_time method=bandlimited {tq:7.3f} s   peer/qualplan {tp / tq:5.2f}"
          f"   CPU {CPU['fds_bl']:7.3f} s (peer/qualplan {cp / CPU['fds_bl']:5.2f})")
    print(f"   qualplan fds_time method=ramp        {tr:7.3f} s   peer/qualplan {tp / tr:5.2f}"
          f"   CPU {CPU['fds_ramp']:7.3f} s (peer/qualplan {cp / CPU['fds_ramp']:5.2f})")
    print(f"   peer lfilter + pyyeti + Miner        {tp:7.3f} s   CPU {cp:7.3f} s")
    top = fn > 1000
    print(f"   damage above fs/10: bandlimited / ramp {np.median(dq[top] / dr[top]):.2f}"
          " (median; the ramp model's sinc^2 loss)")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--srs-only", action="store_true", help="skip the FDS part")
    a = ap.parse_args()
    print(f"{platform.processor() or platform.machine()}, {os.cpu_count()} cores,"
          f" numpy {np.__version__}")
    print(f"load average {os.getloadavg()[0]:.2f} (1 min) at start")
    bench_srs(a.samples, a.repeat)
    if not a.srs_only:
        bench_fds(a.samples, a.repeat)


if __name__ == "__main__":
    main()
