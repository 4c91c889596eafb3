"""CPU per request of `qualplan serve` (uvicorn) under locust: what a served request costs.

One fresh PostgreSQL database (created and dropped here) seeded as in
benchmarks/bench_api.py, ``qualplan serve --workers N`` on 127.0.0.1, then locust
headless (benchmarks/locust_api.py: 80 % reads / 20 % writes, no think time) for
``--duration`` seconds. The CPU time (user + sys, from /proc/PID/stat) of the API worker
processes, of the PostgreSQL server's processes and of locust is taken over the run and
divided by the requests answered, beside the load average. With ``--py-spy FILE`` one
worker is sampled by py-spy (``py-spy record --pid``, raw collapsed stacks; py-spy must be
installed in the virtual environment). Linux only. Not a timed test.

    .venv/bin/python benchmarks/bench_api_served_cpu.py [--workers 2] [--duration 25]
        [--users 50] [--pg postgresql://postgres@127.0.0.1:5432/postgres] [--py-spy out.raw]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
import uuid
from datetime import UTC, datetime
from pathlib import Path

import psycopg

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_api import HOST, free_port, seed, wait_for_health  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
TICK = os.sysconf("SC_CLK_TCK")


def cpu_s(pid: int) -> float:
    """User + system CPU seconds of one process (/proc/PID/stat, fields 14 and 15)."""
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    except OSError:
        return 0.0
    return (int(fields[11]) + int(fields[12])) / TICK


def children(pid: int) -> list[int]:
    out = []
    for task in Path(f"/proc/{pid}/task").iterdir():
        kids = (task / "children").read_text().split()
        out += [int(k) for k in kids]
    return out


def postgres_pids() -> list[int]:
    pids = []
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                if (d / "comm").read_text().strip() in ("postgres", "postmaster"):
                    pids.append(int(d.name))
            except OSError:
                pass
    return pids


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--duration", type=float, default=25.0)
    ap.add_argument("--users", type=int, default=50)
    ap.add_argument("--pg", default="postgresql://postgres@127.0.0.1:5432/postgres")
    ap.add_argument("--py-spy", dest="pyspy", default=None)
    args = ap.parse_args()
    duration = min(args.duration, 300.0)
    exe = Path(sys.executable).parent
    name = f"qp_bench_{uuid.uuid4().hex[:8]}"
    with psycopg.connect(args.pg, autocommit=True) as conn:
        conn.execute(f'CREATE DATABASE "{name}"')
    url = args.pg.rsplit("/", 1)[0] + f"/{name}"
    server = spy = log = sessions = None
    tmp = tempfile.TemporaryDirectory(prefix="qp_bench_served_")
    try:
        subprocess.run([str(exe / "qualplan"), "init", "--db", url], check=True,
                       capture_output=True)
        demo = seed(url, n_products=13, n_reqs=260)
        demo_file, times_file = Path(tmp.name) / "demo.json", Path(tmp.name) / "times.json"
        demo_file.write_text(json.dumps(demo))
        port = free_port()
        env = {**os.environ, "QUALPLAN_DATABASE_URL": url,
               "QUALPLAN_WEB_SECRET": uuid.uuid4().hex}
        log = open(Path(tmp.name) / "serve.log", "w")  # noqa: SIM115 - closed below
        server = subprocess.Popen(
            [str(exe / "qualplan"), "serve", "--host", HOST, "--port", str(port),
             "--workers", str(args.workers), "--db", url],
            stdout=log, stderr=subprocess.STDOUT, env=env)
        base = f"http://{HOST}:{port}"
        wait_for_health(f"{base}/api/v1", server, 300, Path(log.name))
        time.sleep(2.0 * args.workers)
        workers = children(server.pid)
        # uvicorn's supervisor may sit between: the processes that serve are the leaves
        leaves = [w for w in workers if not children(w)] or workers
        leaves = [w for w in leaves if b"resource_tracker" not in
                  Path(f"/proc/{w}/cmdline").read_bytes()]
        locust = subprocess.Popen(
            [str(exe / "locust"), "-f", str(ROOT / "benchmarks" / "locust_api.py"),
             "--headless", "--host", base, "-u", str(args.users), "-r", str(args.users),
             "--run-time", f"{int(duration)}s", "--stop-timeout", "5", "--only-summary",
             "--loglevel", "WARNING"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            env={**os.environ, "QUALPLAN_BENCH_DEMO": str(demo_file),
                 "QUALPLAN_BENCH_TIMES": str(times_file),
                 "QUALPLAN_BENCH_USERS": str(args.users)})
        time.sleep(3.0)  # users started
        marks = []  # (unix time, API CPU s, PostgreSQL CPU s, locust CPU s, load)

        def mark() -> None:
            marks.append((time.time(), sum(cpu_s(p) for p in leaves),
                          sum(cpu_s(p) for p in postgres_pids()), cpu_s(locust.pid),
                          os.getloadavg()[0]))

        mark()
        if args.pyspy:
            spy = subprocess.Popen(
                [str(exe / "py-spy"), "record", "--gil", "--pid", str(leaves[0]), "-r",
                 "200", "--format", "raw", "-o", args.pyspy, "--duration",
                 str(int(duration - 8))], stdout=subprocess.DEVNULL,
                stderr=subprocess.DEVNULL)
        # two windows: the first requests of fresh processes (mappers configured,
        # statements compiled, routes resolved once) and the steady state after them
        half = (duration - 6.0) / 2
        time.sleep(half)
        mark()
        time.sleep(half)
        mark()
        per_proc = [cpu_s(p) for p in leaves]
        locust.wait(timeout=duration + 60)
        if spy is not None:
            spy.wait(timeout=60)
        samples = json.loads(times_file.read_text())
    finally:
        if server is not None:
            server.terminate()
            try:
                server.wait(timeout=20)
            except subprocess.TimeoutExpired:
                server.kill()
            log.close()
        with psycopg.connect(args.pg, autocommit=True) as conn:
            # connections the database accepted over the run (PostgreSQL 14 and later)
            sessions = conn.execute("SELECT sessions FROM pg_stat_database WHERE "
                                    "datname = %s", (name,)).fetchone()
            conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        served_log = (Path(tmp.name) / "serve.log").read_text()
        tmp.cleanup()
    stamps = []
    for line in served_log.splitlines():
        if '"qualplan.request"' in line:
            rec = json.loads(line)
            stamps.append(datetime.strptime(rec["time"], "%Y-%m-%dT%H:%M:%S.%fZ")
                          .replace(tzinfo=UTC).timestamp())
    reads = sum(1 for s in samples if s[0].startswith("read"))
    errors = sum(1 for s in samples if not s[2])
    print(f"{args.workers} API processes, {args.users} users, {duration:.0f} s; "
          f"{len(samples)} requests ({reads} reads), {errors} errors (locust)")
    for (ta, api_a, pg_a, lo_a, load_a), (tb, api_b, pg_b, lo_b, load_b), what in (
            (marks[0], marks[1], "first half"), (marks[1], marks[2], "second half")):
        n = sum(1 for s in stamps if ta <= s < tb)
        print(f"{what}: {tb - ta:.1f} s, {n} requests logged ({n / (tb - ta):.0f}/s), "
              f"load {load_a:.2f} -> {load_b:.2f}; CPU per request: API "
              f"{1000 * (api_b - api_a) / n:.2f} ms, PostgreSQL "
              f"{1000 * (pg_b - pg_a) / n:.2f} ms, locust {1000 * (lo_b - lo_a) / n:.2f} ms")
    print(f"connections opened to the database: {sessions[0] if sessions else '?'}")
    print("API processes' CPU s since start: " + ", ".join(f"{c:.1f}" for c in per_proc))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
