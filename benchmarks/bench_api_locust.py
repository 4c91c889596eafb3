"""HTTP API under load with locust: 50 users, 80 % reads / 20 % writes, 60 s, on
PostgreSQL with 1 and 2 API processes (`qualplan serve --workers N`), loopback only.

For each process count: a fresh PostgreSQL database (created and dropped here), the
schema (`qualplan init`), the demo rows of benchmarks/bench_api.py (13 products, 52
environments, 260 requirements, a reader and a writer token), `qualplan serve --workers
N` on 127.0.0.1, then locust headless (benchmarks/locust_api.py, FastHttpUser, no think
time) for a bounded time. Every response time is kept, so the read and write p50/p99
are of all requests of the kind (not a mean of per-route percentiles). Prints errors,
throughput and p50/p99 per kind, the machine's load average before and after; with
``--write`` stores the table in docs/benchmarks/api-locust.md. Not a timed test.

    .venv/bin/python benchmarks/bench_api_locust.py [--workers 1 2] [--duration 60]
        [--users 50] [--pg postgresql://postgres@127.0.0.1:5432/postgres] [--write]
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
import uuid
from datetime import UTC, datetime
from pathlib import Path

import psycopg

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_api import HOST, free_port, pct, seed, wait_for_health  # noqa: E402

from qualplan import __version__  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
MAX_DURATION_S = 600.0  # bounded in time whatever is asked


def run_one(pg: str, workers: int, users: int, duration: float, tmp: Path) -> dict:
    name = f"qp_bench_{uuid.uuid4().hex[:8]}"
    with psycopg.connect(pg, autocommit=True) as conn:
        conn.execute(f'CREATE DATABASE "{name}"')
    url = pg.rsplit("/", 1)[0] + f"/{name}"
    exe = Path(sys.executable).parent
    server = None
    try:
        subprocess.run([str(exe / "qualplan"), "init", "--db", url], check=True,
                       capture_output=True)
        demo = seed(url, n_products=13, n_reqs=260)
        demo_file, times_file = tmp / f"demo-{workers}.json", tmp / f"times-{workers}.json"
        demo_file.write_text(json.dumps(demo))
        port = free_port()
        env = {**os.environ, "PYTHONUNBUFFERED": "1", "QUALPLAN_DATABASE_URL": url,
               "QUALPLAN_WEB_SECRET": uuid.uuid4().hex}
        log = open(tmp / f"serve-{workers}.log", "w")  # noqa: SIM115 - closed below
        server = subprocess.Popen(
            [str(exe / "qualplan"), "serve", "--host", HOST, "--port", str(port),
             "--workers", str(workers), "--db", url],
            stdout=log, stderr=subprocess.STDOUT, env=env)
        base = f"http://{HOST}:{port}"
        # N processes import numpy, scipy, numba
        wait_for_health(f"{base}/api/v1", server, 300, Path(log.name))
        time.sleep(2.0 * workers)  # every process up (uvicorn starts them one by one)
        load_before = os.getloadavg()
        t0 = time.perf_counter()
        subprocess.run(
            [str(exe / "locust"), "-f", str(ROOT / "benchmarks" / "locust_api.py"),
             "--headless", "--host", base, "-u", str(users), "-r", str(users),
             "--run-time", f"{int(duration)}s", "--stop-timeout", "5", "--only-summary",
             "--loglevel", "WARNING"],
            check=False, capture_output=True, timeout=duration + 120,
            env={**os.environ, "QUALPLAN_BENCH_DEMO": str(demo_file),
                 "QUALPLAN_BENCH_TIMES": str(times_file),
                 "QUALPLAN_BENCH_USERS": str(users)})
        elapsed = time.perf_counter() - t0
        load_after = os.getloadavg()
        samples = json.loads(times_file.read_text())
    finally:
        if server is not None:
            server.terminate()
            try:
                server.wait(timeout=20)
            except subprocess.TimeoutExpired:
                server.kill()
            log.close()
        with psycopg.connect(pg, autocommit=True) as conn:
            conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
    return {"workers": workers, "elapsed_s": elapsed, "duration_s": duration,
            "samples": samples, "load_before": load_before, "load_after": load_after}


def summary(run: dict) -> dict:
    out = {}
    for kind in ("read", "write"):
        ms = [t for n, t, ok, _e in run["samples"] if n.startswith(kind)]
        failed = [(n, e) for n, _t, ok, e in run["samples"] if n.startswith(kind) and not ok]
        errors = len(failed)
        if failed:
            print(f"{kind} errors, first: {failed[:3]}", flush=True)
        out[kind] = {"count": len(ms), "errors": errors,
                     "per_s": len(ms) / run["duration_s"],
                     "p50_ms": statistics.median(ms) if ms else float("nan"),
                     "p99_ms": pct(ms, 0.99) if ms else float("nan")}
    return out


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--duration", type=float, default=60.0, help="seconds of load")
    ap.add_argument("--users", type=int, default=50)
    ap.add_argument("--pg", default="postgresql://postgres@127.0.0.1:5432/postgres",
                    help="a PostgreSQL server's maintenance database (databases are made "
                    "and dropped beside it)")
    ap.add_argument("--write", action="store_true", help="write docs/benchmarks/api-locust.md")
    args = ap.parse_args()
    duration = min(args.duration, MAX_DURATION_S)
    lines = ["| API processes | kind | requests | per s | p50 [ms] | p99 [ms] | errors | "
             "load average before / after |",
             "|---:|---|---:|---:|---:|---:|---:|---|"]
    with tempfile.TemporaryDirectory(prefix="qp_bench_locust_") as tmp:
        for n in args.workers:
            run = run_one(args.pg, n, args.users, duration, Path(tmp))
            res = summary(run)
            for kind in ("read", "write"):
                r = res[kind]
                lines.append(
                    f"| {n} | {kind}s | {r['count']} | {r['per_s']:.0f} | {r['p50_ms']:.0f} | "
                    f"{r['p99_ms']:.0f} | {r['errors']} | {run['load_before'][0]:.2f} / "
                    f"{run['load_after'][0]:.2f} |")
            print("\n".join(lines), flush=True)
    head = [
        f"qualplan {__version__}, {datetime.now(UTC):%Y-%m-%d %H:%M} UTC, "
        f"{platform.python_implementation()} {platform.python_version()}, "
        f"{os.cpu_count()} cores (shared with other work: see the load average); "
        f"`qualplan serve --workers N` on PostgreSQL, loopback; locust {args.users} users "
        f"(one process on the same machine), 80 % reads / 20 % writes, no think time, "
        f"{duration:.0f} s; 260 requirements, 52 environments.", ""]
    text = "\n".join([*head, *lines]) + "\n"
    print(text)
    if args.write:
        out = ROOT / "docs" / "benchmarks" / "api-locust.md"
        out.write_text("# API under load (locust, PostgreSQL)\n\nWritten by "
                       "`benchmarks/bench_api_locust.py --write`.\n\n" + text)
        print(f"wrote {out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
