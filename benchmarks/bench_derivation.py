"""Derivation of one random test level from 10 inputs (issue 12 benchmark goal: < 10 s).

2 records of 5 min at 20 kHz and 8 measured spectra, each in its own phase; the policy
asks 100 natural frequencies (20-2000 Hz, 15 per octave) and 3 Basquin exponents (4, 8,
12). Times ``planning.levels.derive_level`` for an envelope level (per-input time
compression, record analysis, coverage of the life: FDS for 3 b and ERS of every input)
and for an FDS-equivalent level (inversion for 3 b, then the same coverage). CPU time is
the process time of all threads (the measure on a shared machine); a derivation that is
refused (e.g. an FDS inversion that misses its tolerance) is timed up to its refusal and
the refusal printed. Run:

    .venv/bin/python benchmarks/bench_derivation.py [--repeat 2] [--only envelope]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np

from qualplan.dynamics.synthesis import gaussian_from_psd
from qualplan.planning import catalog, environments, levels, policies
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import ValidationFailed
from qualplan.store import migrate
from qualplan.store import models as m
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work

FS = 20_000.0
RECORD_S = 300.0


def build(url: str, f_lo_hz: float = 20.0) -> tuple[int, int, list[int]]:
    actor = Actor("bench", m.Role.admin)
    factory = make_sessionmaker(make_engine(url))
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, actor, s.ProgramCreate(name="bench program"))
        policies.ensure_default_policies(session, actor)
        unit = catalog.create_product(session, actor, s.ProductCreate(
            program_id=prog.id, name="bench unit"))
        src = policies.policy_ref(session, "military-810h")
        pol = policies.copy_policy(session, actor, src.id, s.PolicyCopy(name="bench 3 b"))
        rules = policies.rules_of(pol).model_copy(update={"equivalence": s.EquivalenceRule(
            b=[4.0, 8.0, 12.0], f_lo_hz=f_lo_hz, f_hi_hz=2000.0, points_per_octave=15)})
        policies.update_policy(session, actor, pol.id, s.PolicyUpdate(rules=rules), None)
        revs = []
        rng = np.random.default_rng(1)
        for i in range(2):
            ph = catalog.create_phase(session, actor, s.PhaseCreate(
                program_id=prog.id, name=f"flight {i}", duration_s=3600.0, occurrences=20))
            x = gaussian_from_psd([20.0, 2000.0], [0.01 * (i + 1), 0.01 * (i + 1)], RECORD_S,
                                  FS, rng=rng)
            env = environments.create_environment(session, actor, s.EnvironmentCreate(
                product_id=unit.id, phase_id=ph.id, name=f"record {i}",
                kind=m.EnvironmentKind.time_history, axis=m.Axis.Z,
                data={"dt_s": 1 / FS, "accel_g": []}), array=x)
            revs.append(env.revisions[-1].id)
        for i in range(8):
            ph = catalog.create_phase(session, actor, s.PhaseCreate(
                program_id=prog.id, name=f"phase {i}", duration_s=1800.0 * (i + 1)))
            f = np.geomspace(20.0, 2000.0, 400)
            a = 0.004 * (1 + i) * (1 + 0.5 * np.sin(np.log(f) * (2 + i)))
            env = environments.create_environment(session, actor, s.EnvironmentCreate(
                product_id=unit.id, phase_id=ph.id, name=f"spectrum {i}",
                kind=m.EnvironmentKind.random, axis=m.Axis.Z,
                data={"freq_hz": f.tolist(), "asd_g2_hz": a.tolist()}))
            revs.append(env.revisions[-1].id)
        return unit.id, pol.id, revs


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--only", choices=("envelope", "fds_equivalent"), default=None)
    ap.add_argument("--f-lo-hz", type=float, default=20.0,
                    help="lower edge of the policy's natural-frequency band [Hz] (default 20)")
    args = ap.parse_args()
    actor = Actor("bench", m.Role.admin)
    with tempfile.TemporaryDirectory() as tmp:
        url = f"sqlite:///{Path(tmp) / 'bench.db'}"
        migrate.upgrade(url)
        t0 = time.perf_counter()
        unit_id, pol_id, revs = build(url, args.f_lo_hz)
        print(f"built 10 inputs in {time.perf_counter() - t0:.1f} s; "
              f"load average {os.getloadavg()[0]:.1f}")
        factory = make_sessionmaker(make_engine(url))
        for combination in [args.only] if args.only else ("envelope", "fds_equivalent"):
            for k in range(args.repeat):
                refused = None
                with unit_of_work(factory) as session:
                    w0, c0 = time.perf_counter(), time.process_time()
                    try:
                        lvl = levels.derive_level(session, actor, s.LevelRecipe(
                            product_id=unit_id, name=f"{combination} {k}", kind="random",
                            axis=m.Axis.Z, revision_ids=revs, combination=combination,
                            policy_id=pol_id))
                    except ValidationFailed as exc:
                        refused = exc
                    wall, cpu = time.perf_counter() - w0, time.process_time() - c0
                    what = (f"refused: {refused}" if refused else
                            f"{len(lvl.result['coverage']['fn_hz'])} fn in the coverage")
                load = " ".join(f"{x:.1f}" for x in os.getloadavg())
                print(f"{combination}: {wall:.2f} s wall, {cpu:.2f} s CPU ({what}; "
                      f"load average {load})")


if __name__ == "__main__":
    main()
