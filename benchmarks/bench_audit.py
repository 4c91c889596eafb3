"""Audit of a program with 2,000 requirements and 500 environments on SQLite (or, with
--pg, on PostgreSQL; issue 19's goal: 20,000 requirements and 5,000 environments < 3 s).

Builds the data through the planning use cases (10 products x 50 environments,
20 levels, 2,000 requirements each with one piece of evidence), then times
``planning.audit.audit`` over the whole program. Run:

    .venv/bin/python benchmarks/bench_audit.py [--requirements 2000] [--environments 500]
        [--pg postgresql://postgres@127.0.0.1:5432/postgres] [--keep] [--reuse URL PID]

The build is slow (about 18 min at 20,000 requirements on PostgreSQL): ``--keep`` leaves
the built database in place and prints its URL and program id, ``--reuse URL PID`` times
the audit of program PID in a database built that way (no build).
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
import uuid
from contextlib import contextmanager
from pathlib import Path

from qualplan.planning import audit, catalog, environments, evidence, levels, policies
from qualplan.planning import requirements as reqs
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.store import migrate
from qualplan.store import models as m
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work


def build(url: str, n_req: int, n_env: int, n_products: int = 10, n_levels: int = 20) -> int:
    actor = Actor("bench", m.Role.admin)
    factory = make_sessionmaker(make_engine(url))
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, actor, s.ProgramCreate(name="bench program"))
        policies.ensure_default_policies(session, actor)
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        phase = catalog.create_phase(session, actor, s.PhaseCreate(
            program_id=prog.id, name="flight", duration_s=600.0))
        products = [catalog.create_product(session, actor, s.ProductCreate(
            program_id=prog.id, name=f"unit {i}")) for i in range(n_products)]
        env_revs: dict[int, list[int]] = {p.id: [] for p in products}
        for j in range(n_env):
            p = products[j % n_products]
            lvl = 0.01 * (1 + (j % 7) / 10)
            e = environments.create_environment(session, actor, s.EnvironmentCreate(
                product_id=p.id, phase_id=phase.id, name=f"env {j}", kind="random",
                axis=["X", "Y", "Z"][j % 3],
                data={"freq_hz": [20.0, 100.0, 1000.0, 2000.0],
                      "asd_g2_hz": [lvl / 4, lvl, lvl, lvl / 2]}))
            env_revs[p.id].append((e.axis, e.revisions[-1].id))
        made = []
        for k in range(n_levels):
            p = products[k % n_products]
            axis = ["X", "Y", "Z"][k % 3]
            ids = [rid for ax, rid in env_revs[p.id] if ax.value == axis][:3]
            made.append(levels.derive_level(session, actor, s.LevelRecipe(
                product_id=p.id, name=f"random {axis}", kind="random", axis=axis,
                revision_ids=ids, policy_id=gevs.id)))
        for i in range(n_req):
            lv = made[i % n_levels]
            r = reqs.create_requirement(session, actor, s.RequirementCreate(
                program_id=prog.id, key=f"REQ-{i:05d}", text="bench", product_id=lv.product_id,
                level_id=lv.id if i % 2 == 0 else None,
                method="inspection" if i % 2 == 0 else "analysis"))
            if i % 2 == 0:
                evidence.add_inspection(session, actor, r.id, s.InspectionEvidenceIn(
                    passed=i % 10 != 0, note="looked"))
            else:
                evidence.add_analysis(session, actor, r.id, s.AnalysisEvidenceIn(
                    applied=100.0, allowable=150.0, units="MPa"))
        return prog.id


@contextmanager
def database(pg: str | None, tmp: str, keep: bool = False):
    """A new SQLite file in `tmp` (or beside it with `keep`), or a new PostgreSQL database
    beside `pg`'s (dropped at the end unless `keep`)."""
    if pg is None:
        where = Path(tempfile.gettempdir()) if keep else Path(tmp)
        yield f"sqlite:///{where / f'qp_bench_audit_{uuid.uuid4().hex[:8]}.db'}"
        return
    import psycopg

    name = f"qp_bench_audit_{uuid.uuid4().hex[:8]}"
    with psycopg.connect(pg, autocommit=True) as conn:
        conn.execute(f'CREATE DATABASE "{name}"')
    try:
        yield pg.rsplit("/", 1)[0] + f"/{name}"
    finally:
        if not keep:
            with psycopg.connect(pg, autocommit=True) as conn:
                conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--requirements", type=int, default=2000)
    ap.add_argument("--environments", type=int, default=500)
    ap.add_argument("--pg", default=None, help="a PostgreSQL maintenance database URL "
                    "(e.g. postgresql://postgres@127.0.0.1:5432/postgres): the benchmark "
                    "runs in a new database beside it; default a SQLite file")
    ap.add_argument("--keep", action="store_true",
                    help="keep the built database and print its URL and program id")
    ap.add_argument("--reuse", nargs=2, metavar=("URL", "PID"), default=None,
                    help="time the audit of program PID in a database built with --keep")
    args = ap.parse_args()
    if args.reuse is not None:
        run(args.reuse[0], int(args.reuse[1]))
        return
    with tempfile.TemporaryDirectory() as tmp, database(args.pg, tmp, args.keep) as url:
        migrate.upgrade(url)
        t0 = time.perf_counter()
        pid = build(url, args.requirements, args.environments)
        print(f"built {args.requirements} requirements, {args.environments} environments "
              f"in {time.perf_counter() - t0:.1f} s")
        if args.keep:
            print(f"kept: --reuse {url} {pid}")
        run(url, pid)


def run(url: str, pid: int) -> None:
    """Time the audit of program `pid` five times: wall and CPU seconds of this process
    (the database server's CPU is not in it)."""
    factory = make_sessionmaker(make_engine(url))
    walls, cpus = [], []
    for _ in range(5):
        with factory() as session:
            t0, c0 = time.perf_counter(), time.process_time()
            report = audit.audit(session, pid)
            walls.append(time.perf_counter() - t0)
            cpus.append(time.process_time() - c0)
    print(f"audit of {len(report.items)} requirements: wall best {min(walls):.3f} s, "
          f"median {sorted(walls)[2]:.3f} s; CPU best {min(cpus):.3f} s, median "
          f"{sorted(cpus)[2]:.3f} s; load average {os.getloadavg()[0]:.1f}; "
          f"counts {report.counts}")


if __name__ == "__main__":
    main()
