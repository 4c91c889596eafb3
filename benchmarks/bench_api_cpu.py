"""CPU time of one API read request, in process (the load-independent figure of issue 19).

Seeds the demo rows of benchmarks/bench_api.py (13 products, 52 environments, 260
requirements, a viewer and an engineer token) into a fresh database (SQLite in a
temporary folder, or a PostgreSQL database created and dropped beside ``--pg``), builds
the served app (``qualplan.service.create_service``: API and web pages), and calls it
through ASGI directly, without a network or an HTTP client: a scope, the body, the
response collected. The read mix is the one of benchmarks/locust_api.py (requirement
pages, a requirement, an environment, its revisions, the programs, health; weights 3 4 2
2 1 1), the viewer's token, ``--concurrency`` requests at a time on one event loop (sync
routes run in the thread pool as under uvicorn).

Prints the CPU time of this process (user + sys of all its threads,
``time.process_time``) and the wall time per request, overall and per route, for
``--rounds`` rounds of ``--requests`` requests after a warm-up. The database server's own
CPU (PostgreSQL backends) is not counted. The load average is printed beside: the CPU
figure barely depends on it, the wall figure does. Not a timed test.

    .venv/bin/python benchmarks/bench_api_cpu.py [--requests 1000] [--rounds 3]
        [--concurrency 1] [--pg postgresql://postgres@127.0.0.1:5432/postgres]
        [--route requirement] [--profile]

``--profile`` prints a pyinstrument profile of the measured rounds; the sync routes and
dependencies then run inline on the event loop's thread (pyinstrument samples one
thread), so the CPU figures of a profiled run are not the served ones.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import random
import statistics
import subprocess
import sys
import tempfile
import time
import uuid
from collections import defaultdict
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_api import seed  # noqa: E402

#: SQL statements sent to the database (all engines of this process)
STATEMENTS = [0]

WEIGHTS = {"requirements page": 3, "requirement": 4, "environment": 2, "revisions": 2,
           "programs": 1, "health": 1}


def read_paths(demo: dict, n: int, rnd: random.Random,
               only: str | None = None) -> list[tuple[str, str, str]]:
    """`n` reads of the locust mix (or of the route `only`): (route name, path, query)."""
    out = []
    kinds = [only] * n if only else rnd.choices(list(WEIGHTS), list(WEIGHTS.values()), k=n)
    for kind in kinds:
        if kind == "requirements page":
            out.append((kind, "/api/v1/requirements",
                        f"program_id={demo['program']}&offset={rnd.randrange(0, 150)}&limit=50"))
        elif kind == "requirement":
            out.append((kind, f"/api/v1/requirements/{rnd.choice(demo['requirements'])}", ""))
        elif kind == "environment":
            out.append((kind, f"/api/v1/environments/{rnd.choice(demo['environments'])}", ""))
        elif kind == "revisions":
            out.append((kind, f"/api/v1/environments/{rnd.choice(demo['environments'])}"
                              "/revisions", ""))
        elif kind == "programs":
            out.append((kind, "/api/v1/programs", ""))
        else:
            out.append((kind, "/api/v1/health", ""))
    return out


async def call(app, path: str, query: str, token: str) -> tuple[int, int]:
    """One GET through the ASGI interface: (status, body bytes)."""
    scope = {"type": "http", "asgi": {"version": "3.0"}, "http_version": "1.1",
             "method": "GET", "scheme": "http", "path": path, "raw_path": path.encode(),
             "root_path": "", "query_string": query.encode(),
             "headers": [(b"host", b"127.0.0.1"), (b"accept", b"application/json"),
                         (b"authorization", f"Bearer {token}".encode())],
             "client": ("127.0.0.1", 50000), "server": ("127.0.0.1", 8000), "state": {}}
    sent = False
    status, size = 0, 0

    async def receive():
        nonlocal sent
        if not sent:
            sent = True
            return {"type": "http.request", "body": b"", "more_body": False}
        await asyncio.sleep(3600)  # a client that waits for the answer
        return {"type": "http.disconnect"}

    async def send(message):
        nonlocal status, size
        if message["type"] == "http.response.start":
            status = message["status"]
        elif message["type"] == "http.response.body":
            size += len(message.get("body", b""))

    await app(scope, receive, send)
    return status, size


async def one_round(app, reads: list[tuple[str, str, str]], token: str,
                    concurrency: int) -> dict:
    """The reads, `concurrency` at a time: CPU and wall seconds, per-route CPU and SQL."""
    per_route: dict[str, list[float]] = defaultdict(list)
    sql: dict[str, list[int]] = defaultdict(list)
    sem = asyncio.Semaphore(concurrency)
    bad: list[str] = []

    async def one(kind: str, path: str, query: str) -> None:
        async with sem:
            c0, q0 = time.process_time(), STATEMENTS[0]
            status, _size = await call(app, path, query, token)
            per_route[kind].append(time.process_time() - c0)
            sql[kind].append(STATEMENTS[0] - q0)
            if status != 200:
                bad.append(f"{status} {path}?{query}")

    c0, w0 = time.process_time(), time.perf_counter()
    await asyncio.gather(*(one(*r) for r in reads))
    cpu, wall = time.process_time() - c0, time.perf_counter() - w0
    if bad:
        raise SystemExit(f"{len(bad)} reads failed, first: {bad[:3]}")
    return {"n": len(reads), "cpu_s": cpu, "wall_s": wall, "per_route": per_route,
            "sql": sql, "load": os.getloadavg()[0]}


def run_inline() -> None:
    """Run anyio's thread-pool calls on the calling thread (for --profile only)."""
    import anyio.to_thread

    async def inline(func, *args, **_kw):
        return func(*args)

    anyio.to_thread.run_sync = inline


async def run(app, demo: dict, token: str, args) -> list[dict]:
    rnd = random.Random(19)
    rounds = []
    profiler = None
    async with app.router.lifespan_context(app):
        for i in range(args.rounds + 1):  # round 0 warms up (imports, caches, pool)
            reads = read_paths(demo, args.requests if i else max(100, args.requests // 5),
                               rnd, args.route)
            if i == 1 and args.profile:
                from pyinstrument import Profiler

                profiler = Profiler(interval=0.001, async_mode="disabled")
                profiler.start()
            result = await one_round(app, reads, token, args.concurrency)
            if i:
                rounds.append(result)
    if profiler is not None:
        profiler.stop()
        print(profiler.output_text(unicode=False, color=False, show_all=False),
              file=sys.__stdout__)
    return rounds


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--requests", type=int, default=1000, help="reads per round")
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--concurrency", type=int, default=1)
    ap.add_argument("--route", choices=list(WEIGHTS), default=None,
                    help="only this read route (default: the mix)")
    ap.add_argument("--profile", action="store_true",
                    help="print a pyinstrument profile of the measured rounds (sync "
                    "code then runs inline on one thread)")
    ap.add_argument("--pg", default=None, help="a PostgreSQL server's maintenance database "
                    "(a database is made and dropped beside it); SQLite when absent")
    args = ap.parse_args()
    args.requests = min(args.requests, 100_000)
    from sqlalchemy import Engine, event

    if args.profile:
        run_inline()

    @event.listens_for(Engine, "before_cursor_execute")
    def _count(*_a, **_k) -> None:
        STATEMENTS[0] += 1

    tmp = tempfile.TemporaryDirectory(prefix="qp_bench_cpu_")
    name = None
    if args.pg:
        import psycopg

        name = f"qp_bench_{uuid.uuid4().hex[:8]}"
        with psycopg.connect(args.pg, autocommit=True) as conn:
            conn.execute(f'CREATE DATABASE "{name}"')
        url = args.pg.rsplit("/", 1)[0] + f"/{name}"
    else:
        url = f"sqlite:///{Path(tmp.name) / 'bench.db'}"
    try:
        exe = Path(sys.executable).parent / "qualplan"
        subprocess.run([str(exe), "init", "--db", url], check=True, capture_output=True)
        demo = seed(url, n_products=13, n_reqs=260)
        os.environ["QUALPLAN_DATABASE_URL"] = url
        os.environ.setdefault("QUALPLAN_WEB_SECRET", uuid.uuid4().hex)
        os.environ["QUALPLAN_JOB_FILES_DIR"] = str(Path(tmp.name) / "job-files")
        from qualplan.service import create_service

        # the request log writes to stderr as under `serve` (JSON lines to a file): keep
        # it, but in a file of its own
        with open(Path(tmp.name) / "requests.log", "w") as log:  # noqa: SIM117
            err, sys.stderr = sys.stderr, log
            try:
                app = create_service()
                rounds = asyncio.run(run(app, demo, demo["reader"], args))
            finally:
                sys.stderr = err
    finally:
        if name:
            import psycopg

            with psycopg.connect(args.pg, autocommit=True) as conn:
                conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        tmp.cleanup()
    db = "PostgreSQL" if args.pg else "SQLite"
    print(f"{db}, {args.requests} reads per round, concurrency {args.concurrency}")
    for k, r in enumerate(rounds, 1):
        print(f"round {k}: {1000 * r['cpu_s'] / r['n']:.2f} ms CPU, "
              f"{1000 * r['wall_s'] / r['n']:.2f} ms wall per read "
              f"({r['n'] / r['cpu_s']:.0f} reads per CPU s); load {r['load']:.2f}")
    if args.concurrency == 1:  # per-request CPU is only the request's own when serial
        print("per route (median of the rounds' means): ms CPU, SQL statements")
        for kind in WEIGHTS:
            means = [statistics.fmean(r["per_route"][kind]) for r in rounds
                     if r["per_route"][kind]]
            stmts = [statistics.fmean(r["sql"][kind]) for r in rounds if r["sql"][kind]]
            if not means:
                continue
            print(f"  {kind:18s} {1000 * statistics.median(means):6.2f} ms  "
                  f"{statistics.median(stmts):5.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
