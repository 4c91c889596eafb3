"""CPU time of one API write request, in process (issue 19's writes of the locust mix).

The seed, app and ASGI calls of benchmarks/bench_api_cpu.py (served app, no network),
the writer's token, one request at a time. The writes are the three of
benchmarks/locust_api.py: a requirement edit (PATCH with the If-Match of a GET just
before; the GET is counted apart, it is a read), an inspection evidence, an environment
revision (4-point PSD). Prints the CPU time of this process (``time.process_time``, all
threads; the database server's own CPU not counted) and the SQL statements per route,
median of the rounds' means, with the load average. ``--profile FILE`` writes a
pyinstrument profile (text) of the last round. Not a timed test.

    .venv/bin/python benchmarks/bench_api_writes_cpu.py [--requests 300] [--rounds 3]
        [--pg postgresql://postgres@127.0.0.1:5432/postgres] [--profile out.txt]
"""

from __future__ import annotations

import argparse
import asyncio
import json
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

STATEMENTS = [0]
#: the SQL of the request being timed (printed with --show-sql)
SQL: list[str] = []
ROUTES = ("read before edit", "requirement edit", "inspection evidence",
          "environment revision")


async def call(app, method: str, path: str, token: str, body: dict | None = None,
               headers: dict | None = None) -> tuple[int, dict, bytes]:
    """One request through the ASGI interface: (status, response headers, body)."""
    raw = json.dumps(body).encode() if body is not None else b""
    hdrs = [(b"host", b"127.0.0.1"), (b"accept", b"application/json"),
            (b"authorization", f"Bearer {token}".encode())]
    if body is not None:
        hdrs += [(b"content-type", b"application/json"),
                 (b"content-length", str(len(raw)).encode())]
    hdrs += [(k.lower().encode(), v.encode()) for k, v in (headers or {}).items()]
    scope = {"type": "http", "asgi": {"version": "3.0"}, "http_version": "1.1",
             "method": method, "scheme": "http", "path": path, "raw_path": path.encode(),
             "root_path": "", "query_string": b"", "headers": hdrs,
             "client": ("127.0.0.1", 50000), "server": ("127.0.0.1", 8000), "state": {}}
    sent = False
    status, out_headers, chunks = 0, {}, []

    async def receive():
        nonlocal sent
        if not sent:
            sent = True
            return {"type": "http.request", "body": raw, "more_body": False}
        await asyncio.sleep(3600)
        return {"type": "http.disconnect"}

    async def send(message):
        nonlocal status, out_headers
        if message["type"] == "http.response.start":
            status = message["status"]
            out_headers = {k.decode().lower(): v.decode() for k, v in message["headers"]}
        elif message["type"] == "http.response.body":
            chunks.append(message.get("body", b""))

    await app(scope, receive, send)
    return status, out_headers, b"".join(chunks)


async def one_round(app, demo: dict, n: int, rnd: random.Random, step0: int) -> dict:
    per_route: dict[str, list[float]] = defaultdict(list)
    sql: dict[str, list[int]] = defaultdict(list)
    token = demo["writer"]
    last_sql: dict[str, list[str]] = {}

    async def timed(kind, *a, ok=(200, 201), **kw):
        SQL.clear()
        c0, q0 = time.process_time(), STATEMENTS[0]
        status, headers, body = await call(app, *a, token, **kw)
        last_sql[kind] = list(SQL)
        per_route[kind].append(time.process_time() - c0)
        sql[kind].append(STATEMENTS[0] - q0)
        if status not in ok:
            raise SystemExit(f"{kind}: {status} {body[:300]!r}")
        return headers

    c0 = time.process_time()
    for i in range(n):
        step = step0 + i
        action = step % 3
        req = rnd.choice(demo["requirements"])
        if action == 0:
            h = await timed("read before edit", "GET", f"/api/v1/requirements/{req}")
            await timed("requirement edit", "PATCH", f"/api/v1/requirements/{req}",
                        body={"acceptance_criterion": f"edit {step}"},
                        headers={"If-Match": h["etag"]})
        elif action == 1:
            await timed("inspection evidence", "POST",
                        f"/api/v1/requirements/{req}/evidence/inspection",
                        body={"passed": True, "note": f"inspection {step}"})
        else:
            env = rnd.choice(demo["environments"])
            data = {"freq_hz": [20.0, 80.0, 500.0, 2000.0],
                    "asd_g2_hz": [0.01 + 1e-6 * step, 0.04, 0.04, 0.01]}
            await timed("environment revision", "POST",
                        f"/api/v1/environments/{env}/revisions",
                        body={"data": data, "note": "bench"})
    return {"n": n, "cpu_s": time.process_time() - c0, "per_route": per_route, "sql": sql,
            "last_sql": last_sql, "load": os.getloadavg()[0]}


async def run(app, demo: dict, args) -> list[dict]:
    rnd = random.Random(19)
    rounds, step = [], 0
    profiler = None
    async with app.router.lifespan_context(app):
        for i in range(args.rounds + 1):  # round 0 warms up
            n = args.requests if i else max(60, args.requests // 5)
            if args.profile and i == args.rounds:
                from pyinstrument import Profiler

                profiler = Profiler(interval=0.0005, async_mode="disabled")
                profiler.start()
            result = await one_round(app, demo, n, rnd, step)
            step += n
            if i:
                rounds.append(result)
    if profiler is not None:
        profiler.stop()
        Path(args.profile).write_text(profiler.output_text(unicode=False, color=False,
                                                           show_all=False))
    return rounds


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--requests", type=int, default=300, help="writes per round")
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--pg", default=None)
    ap.add_argument("--profile", default=None)
    ap.add_argument("--show-sql", action="store_true",
                    help="print the SQL statements of the last request of each route")
    args = ap.parse_args()
    args.requests = min(args.requests, 100_000)
    from sqlalchemy import Engine, event

    @event.listens_for(Engine, "before_cursor_execute")
    def _count(_conn, _cursor, statement, *_a, **_k) -> None:
        STATEMENTS[0] += 1
        SQL.append(" ".join(statement.split())[:160])

    tmp = tempfile.TemporaryDirectory(prefix="qp_bench_wcpu_")
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

        with open(Path(tmp.name) / "requests.log", "w") as log:  # noqa: SIM117
            err, sys.stderr = sys.stderr, log
            try:
                app = create_service()
                rounds = asyncio.run(run(app, demo, args))
            finally:
                sys.stderr = err
    finally:
        if name:
            import psycopg

            with psycopg.connect(args.pg, autocommit=True) as conn:
                conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        tmp.cleanup()
    db = "PostgreSQL" if args.pg else "SQLite"
    print(f"{db}, {args.requests} writes per round (each edit with its GET)")
    for k, r in enumerate(rounds, 1):
        print(f"round {k}: {1000 * r['cpu_s'] / r['n']:.2f} ms CPU per write step; "
              f"load {r['load']:.2f}")
    print("per route (median of the rounds' means): ms CPU, SQL statements")
    for kind in ROUTES:
        means = [statistics.fmean(r["per_route"][kind]) for r in rounds]
        stmts = [statistics.fmean(r["sql"][kind]) for r in rounds]
        print(f"  {kind:22s} {1000 * statistics.median(means):6.2f} ms  "
              f"{statistics.median(stmts):5.1f}")
    if args.show_sql:
        for kind in ROUTES:
            print(f"{kind}:")
            for line in rounds[-1]["last_sql"].get(kind, []):
                print(f"    {line}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
