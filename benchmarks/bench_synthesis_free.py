"""Benchmark of shock synthesis from free samples (issue 16): CPU and wall per target.

Run:  .venv/bin/python benchmarks/bench_synthesis_free.py [--target drop20|pyro|both]

Targets (Q = 10, 1/12-octave grid, defaults of synthesize_shock):
- drop20: 20 g at 100 Hz, 100 g at 500 Hz - 1 kHz, 10 g at 2 kHz (-20 dB in an octave);
- pyro: 30 g at 100 Hz, 1000 g at 1-3 kHz, 150 g at 10 kHz (-9.5 dB/oct).
One run each (no warm-up: the numba kernels are cached on disk). Reports CPU seconds
(process time of all threads), wall seconds and the load average, the worst error
recomputed by the public `srs`, the peaks and the end state.
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

from qualplan.dynamics import srs as S
from qualplan.dynamics.shock_synthesis import synthesize_shock

TARGETS = {
    "drop20": S.SrsProfile([100.0, 500.0, 1000.0, 2000.0], [20.0, 100.0, 100.0, 10.0]),
    "pyro": S.SrsProfile([100.0, 1000.0, 3000.0, 10000.0], [30.0, 1000.0, 1000.0, 150.0]),
}


def run(name: str) -> None:
    prof = TARGETS[name]
    load0 = os.getloadavg()[0]
    c0, w0 = time.process_time(), time.perf_counter()
    res = synthesize_shock(prof, method="free_samples")
    cpu, wall = time.process_time() - c0, time.perf_counter() - w0
    ach = S.srs(res.accel_g, res.dt_s, res.freq_hz, res.q)
    err = float(np.abs(20 * np.log10(ach / prof.value_at(res.freq_hz))).max())
    print(f"{name}: {res.freq_hz.size} fn x {res.accel_g.size} samples, programs"
          f" {res.iterations}, converged {res.converged}, worst error {err:.3f} dB"
          f" (srs recomputed)")
    print(f"  peak accel {res.peak_accel_g:.3g} g, velocity {res.peak_velocity_m_s:.3g} m/s,"
          f" displacement {res.peak_displacement_m * 1e3:.3g} mm; final v/peak"
          f" {abs(res.final_velocity_m_s) / res.peak_velocity_m_s:.1e}, d/peak"
          f" {abs(res.final_displacement_m) / res.peak_displacement_m:.1e}")
    print(f"  CPU {cpu:.1f} s, wall {wall:.1f} s, load average {load0:.1f} ->"
          f" {os.getloadavg()[0]:.1f}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--target", default="drop20", choices=["drop20", "pyro", "both"])
    args = ap.parse_args()
    for name in (["drop20", "pyro"] if args.target == "both" else [args.target]):
        run(name)


if __name__ == "__main__":
    main()
