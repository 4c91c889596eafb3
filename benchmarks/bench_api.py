"""HTTP API under load: 50 reading and 5 writing clients for 30 s on loopback.

Starts ``qualplan serve`` on a temporary SQLite database filled with demo rows,
listening on 127.0.0.1 only, then runs client threads (httpx, one connection each)
for a bounded time and a bounded number of requests. Prints the latency of each kind
of request (median, p99, max) and the error count; ``--write`` stores the table in
docs/benchmarks/api.md.

    .venv/bin/python benchmarks/bench_api.py [--duration 30] [--readers 50] [--writers 5]
"""

from __future__ import annotations

import argparse
import os
import platform
import random
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from collections import defaultdict
from datetime import UTC, datetime
from pathlib import Path

import httpx

from qualplan import __version__
from qualplan.planning import access, catalog, environments, evidence, policies, requirements
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work

ROOT = Path(__file__).resolve().parents[1]
HOST = "127.0.0.1"  # loopback only
MAX_REQUESTS_PER_CLIENT = 200_000
SETUP = Actor("bench-setup", s.Role.admin)
PSD = {"freq_hz": [20.0, 80.0, 500.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.01]}


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind((HOST, 0))
        return sock.getsockname()[1]


def seed(url: str, n_products: int = 5, n_reqs: int = 200) -> dict:
    """Demo rows: a program, products, phases, environments and requirements; tokens."""
    engine = make_engine(url)
    factory = make_sessionmaker(engine)
    out: dict = {"requirements": [], "environments": []}
    with unit_of_work(factory) as session:
        policies.ensure_default_policies(session, SETUP)
        for name, role in (("reader", s.Role.viewer), ("writer", s.Role.engineer)):
            access.create_user(session, SETUP, name, role)
            out[name] = access.create_token(session, SETUP, name, "bench")
        eng = Actor("writer", s.Role.engineer)
        program = catalog.create_program(session, eng, s.ProgramCreate(name="bench program"))
        out["program"] = program.id
        # users see only the programs they are members of (per-program memberships)
        access.grant(session, SETUP, "reader", program.id, s.Role.viewer)
        access.grant(session, SETUP, "writer", program.id, s.Role.engineer)
        phase = catalog.create_phase(session, eng, s.PhaseCreate(
            program_id=program.id, name="launch", duration_s=120.0))
        for p in range(n_products):
            unit = catalog.create_product(session, eng, s.ProductCreate(
                program_id=program.id, name=f"unit {p}"))
            out.setdefault("products", []).append(unit.id)
            for k, axis in enumerate((s.Axis.X, s.Axis.Y, s.Axis.Z, s.Axis.all)):
                data = {**PSD, "asd_g2_hz": [a * (1 + 0.1 * k) for a in PSD["asd_g2_hz"]]}
                env = environments.create_environment(session, eng, s.EnvironmentCreate(
                    product_id=unit.id, phase_id=phase.id, name=f"launch {axis.value}",
                    kind=s.EnvironmentKind.random, axis=axis, data=data))
                out["environments"].append(env.id)
            for r in range(n_reqs // n_products):
                req = requirements.create_requirement(session, eng, s.RequirementCreate(
                    program_id=program.id, key=f"REQ-{p:02d}-{r:03d}", text="demo requirement",
                    product_id=unit.id, method=s.VerificationMethod.inspection))
                if r % 2 == 0:
                    evidence.add_inspection(session, eng, req.id, s.InspectionEvidenceIn(
                        passed=True, note="seen on the bench"))
                out["requirements"].append(req.id)
    engine.dispose()
    return out


def wait_for_health(base: str, server: subprocess.Popen, timeout_s: float, log: Path) -> None:
    """Return once `base`/health answers 200; exit with the end of the server's log if it
    stops or `timeout_s` passes first."""
    deadline = time.monotonic() + timeout_s
    while True:
        try:
            if httpx.get(f"{base}/health", timeout=1.0).status_code == 200:
                return
        except httpx.HTTPError:
            pass
        if time.monotonic() > deadline or server.poll() is not None:
            raise SystemExit("the server did not start:\n" + log.read_text()[-3000:])
        time.sleep(0.2)


class Stats:
    def __init__(self) -> None:
        self.lock = threading.Lock()
        self.latency: dict[str, list[float]] = defaultdict(list)
        self.errors: dict[str, int] = defaultdict(int)
        self.samples: list[str] = []

    def add(self, kind: str, seconds: float, ok: bool, note: str = "") -> None:
        with self.lock:
            self.latency[kind].append(seconds)
            if not ok:
                self.errors[kind] += 1
                if len(self.samples) < 10:
                    self.samples.append(f"{kind}: {note}")


def timed(stats: Stats, kind: str, client: httpx.Client, method: str, path: str,
          ok=(200, 201), **kw) -> httpx.Response | None:
    t0 = time.perf_counter()
    try:
        r = client.request(method, path, **kw)
    except httpx.HTTPError as exc:
        stats.add(kind, time.perf_counter() - t0, False, repr(exc))
        return None
    stats.add(kind, time.perf_counter() - t0, r.status_code in ok,
              f"{r.status_code} {r.text[:200]}")
    return r


def reader(base: str, token: str, demo: dict, stats: Stats, stop: float, seed_: int) -> None:
    rnd = random.Random(seed_)
    reqs, envs = demo["requirements"], demo["environments"]
    routes = [
        ("GET requirements page", lambda: f"/requirements?program_id={demo['program']}"
                                          f"&offset={rnd.randrange(0, 150)}&limit=50", 3),
        ("GET requirement", lambda: f"/requirements/{rnd.choice(reqs)}", 4),
        ("GET environment", lambda: f"/environments/{rnd.choice(envs)}", 2),
        ("GET revisions", lambda: f"/environments/{rnd.choice(envs)}/revisions", 2),
        ("GET programs", lambda: "/programs", 1),
        ("GET health", lambda: "/health", 1),
    ]
    weights = [w for *_, w in routes]
    headers = {"Authorization": f"Bearer {token}"}
    with httpx.Client(base_url=base, headers=headers, timeout=30.0) as client:
        for _ in range(MAX_REQUESTS_PER_CLIENT):
            if time.perf_counter() >= stop:
                return
            kind, path, _w = rnd.choices(routes, weights)[0]
            timed(stats, kind, client, "GET", path())


def writer(base: str, token: str, demo: dict, stats: Stats, stop: float, index: int) -> None:
    """Each writer edits its own requirements (If-Match), adds evidence and revisions."""
    rnd = random.Random(1000 + index)
    mine = demo["requirements"][index::len(demo["writers"])]
    env_id = demo["environments"][index]
    headers = {"Authorization": f"Bearer {token}"}
    step = 0
    with httpx.Client(base_url=base, headers=headers, timeout=30.0) as client:
        for _ in range(MAX_REQUESTS_PER_CLIENT):
            if time.perf_counter() >= stop:
                return
            step += 1
            req_id = rnd.choice(mine)
            action = step % 3
            if action == 0:
                got = timed(stats, "GET requirement (writer)", client, "GET",
                            f"/requirements/{req_id}")
                if got is None or got.status_code != 200:
                    continue
                timed(stats, "PATCH requirement", client, "PATCH", f"/requirements/{req_id}",
                      json={"acceptance_criterion": f"edit {step}"},
                      headers={"If-Match": got.headers["ETag"]})
            elif action == 1:
                timed(stats, "POST evidence", client, "POST",
                      f"/requirements/{req_id}/evidence/inspection",
                      json={"passed": True, "note": f"inspection {step}"})
            else:
                data = {**PSD, "asd_g2_hz": [0.01 + 1e-6 * step, 0.04, 0.04, 0.01]}
                timed(stats, "POST revision", client, "POST",
                      f"/environments/{env_id}/revisions", json={"data": data, "note": "bench"})


def pct(values: list[float], q: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, int(round(q * (len(ordered) - 1))))]


def table(stats: Stats, seconds: float) -> list[str]:
    lines = ["| request | count | per s | median [ms] | p99 [ms] | max [ms] | errors |",
             "|---|---:|---:|---:|---:|---:|---:|"]
    groups = {"all reads": [k for k in stats.latency if k.startswith("GET")],
              "all writes": [k for k in stats.latency if not k.startswith("GET")]}
    rows = [(k, stats.latency[k], stats.errors[k]) for k in sorted(stats.latency)]
    for name, kinds in groups.items():
        vals = [v for k in kinds for v in stats.latency[k]]
        rows.append((f"**{name}**", vals, sum(stats.errors[k] for k in kinds)))
    for name, vals, errs in rows:
        if not vals:
            continue
        lines.append(
            f"| {name} | {len(vals)} | {len(vals) / seconds:.0f} | "
            f"{1000 * statistics.median(vals):.1f} | {1000 * pct(vals, 0.99):.1f} | "
            f"{1000 * max(vals):.1f} | {errs} |")
    return lines


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--duration", type=float, default=30.0, help="seconds of load")
    ap.add_argument("--readers", type=int, default=50)
    ap.add_argument("--writers", type=int, default=5)
    ap.add_argument("--write", action="store_true", help="write docs/benchmarks/api.md")
    args = ap.parse_args()
    duration = min(args.duration, 600.0)

    with tempfile.TemporaryDirectory(prefix="qp_bench_api_") as tmp:
        url = f"sqlite:///{Path(tmp) / 'bench.db'}"
        exe = Path(sys.executable).parent / "qualplan"
        subprocess.run([str(exe), "init", "--db", url], check=True, capture_output=True)
        demo = seed(url)
        demo["writers"] = list(range(args.writers))
        port = free_port()
        base = f"http://{HOST}:{port}/api/v1"
        log = open(Path(tmp) / "serve.log", "w")  # noqa: SIM115 - closed below
        server = subprocess.Popen(
            [str(exe), "serve", "--host", HOST, "--port", str(port), "--db", url],
            stdout=log, stderr=subprocess.STDOUT, env={**os.environ, "PYTHONUNBUFFERED": "1"})
        try:
            wait_for_health(base, server, 30, Path(log.name))
            stats = Stats()
            start = time.perf_counter()
            stop = start + duration
            threads = [threading.Thread(target=reader, args=(base, demo["reader"], demo, stats,
                                                             stop, i), daemon=True)
                       for i in range(args.readers)]
            threads += [threading.Thread(target=writer, args=(base, demo["writer"], demo, stats,
                                                              stop, i), daemon=True)
                        for i in range(args.writers)]
            for t in threads:
                t.start()
            for t in threads:
                t.join(timeout=duration + 60)
            elapsed = time.perf_counter() - start
        finally:
            server.terminate()
            try:
                server.wait(timeout=10)
            except subprocess.TimeoutExpired:
                server.kill()
            log.close()

    lines = table(stats, elapsed)
    total_errors = sum(stats.errors.values())
    head = [
        f"qualplan {__version__}, {datetime.now(UTC):%Y-%m-%d %H:%M} UTC, "
        f"{platform.python_implementation()} {platform.python_version()}, "
        f"{os.cpu_count()} cores; `qualplan serve` (uvicorn, one process) on SQLite (WAL), "
        f"loopback; {args.readers} reading + {args.writers} writing clients (closed loop, "
        f"one httpx connection each, in the same machine) for {elapsed:.1f} s; "
        f"200 requirements, 20 environments.",
        "",
        *lines,
        "",
        f"errors: {total_errors}" + (f" (first: {stats.samples})" if stats.samples else ""),
    ]
    print("\n".join(head))
    if args.write:
        path = ROOT / "docs" / "benchmarks" / "api.md"
        text = path.read_text() if path.exists() else ""
        marker = "<!-- results -->"
        if marker in text:
            text = text[: text.index(marker) + len(marker)] + "\n\n" + "\n".join(head) + "\n"
            path.write_text(text)
        else:
            print(f"(no {marker} in {path}; not written)")
    return 1 if total_errors else 0


if __name__ == "__main__":
    raise SystemExit(main())
