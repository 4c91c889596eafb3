"""Modal estimates: coherent random response and CQC combination for many modes.

Times ``random_response`` (coherent |sum m_eff H|^2 W integration, 320 nodes per mode)
and ``cqc_coefficients`` + ``combine`` for k = 10, 50, 200 modes on a 4-breakpoint ASD.
No goal was set by the issue; the figures tell how large a modal summary stays
interactive. Prints wall and CPU seconds (best of 3).

    .venv/bin/python benchmarks/bench_modal.py
"""

from __future__ import annotations

import time

import numpy as np

from qualplan.dynamics import modal

ASD = ([20.0, 80.0, 350.0, 2000.0], [0.01, 0.04, 0.04, 0.007])


def best(fn, repeat=3):
    walls, cpus = [], []
    for _ in range(repeat):
        w0, c0 = time.perf_counter(), time.process_time()
        fn()
        walls.append(time.perf_counter() - w0)
        cpus.append(time.process_time() - c0)
    return min(walls), min(cpus)


def main() -> None:
    rng = np.random.default_rng(17)
    print("| modes | random_response wall / CPU [s] | CQC rho + combine wall [s] |")
    print("|---|---|---|")
    for k in (10, 50, 200):
        fn = np.sort(rng.uniform(30.0, 3000.0, k))
        fn = fn + np.arange(k) * 1e-6  # strictly increasing
        meff = rng.uniform(0.01, 0.2, k)
        rr = best(lambda fn=fn, meff=meff: modal.random_response(*ASD, fn, 0.05, meff))
        peaks = rng.normal(size=k)
        cq = best(lambda fn=fn, peaks=peaks: modal.combine(
            peaks, "cqc", modal.cqc_coefficients(fn, 0.05)))
        print(f"| {k} | {rr[0]:.3f} / {rr[1]:.3f} | {cq[0]:.5f} |")


if __name__ == "__main__":
    main()
