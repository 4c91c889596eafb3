"""A 10-minute, 3-channel record (generated here) imported through the API in chunks by a
served process, whose peak memory stays below a bound.

The server is `qualplan serve` in a process of its own on the run's kind of database (a
new SQLite file, or a new PostgreSQL schema). A thread samples the server's RssAnon
(/proc/PID/status: anonymous resident memory, the process's own; pages of mapped files
and the page cache do not count) every 10 ms during the upload.

The bound: the record is 10 min x 3 channels x 5 kHz = 9.0 M samples, 72 MB as float64
(the body is 72 MB too, over the ordinary 50 MiB upload limit: the record limit applies).
A server that held the whole body, or the whole record as one array, would grow by at
least 72 MB; streaming holds one upload buffer and a few chunks of samples (the chunks of
qualplan.store.records, a few MB each). The bound is half the record, 36 MB above the
idle server (common practice: a margin that tells streaming from holding the record,
whatever the allocator keeps between chunks).
"""

from __future__ import annotations

import os
import re
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import httpx
import numpy as np
import pytest

from qualplan.planning import access, catalog
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.store import migrate
from qualplan.store.models import Role
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work
from tests.served import wait_for_health

pytestmark = pytest.mark.skipif(not Path("/proc/self/status").exists(),
                                reason="RssAnon is read from Linux's /proc")

BIN = Path(sys.executable).parent
SETUP = Actor("mem-setup", Role.admin)
FS = 5000.0
MINUTES = 10.0


def _rss_anon_kb(pid: int) -> int:
    text = Path(f"/proc/{pid}/status").read_text()
    return int(re.search(r"RssAnon:\s+(\d+)", text).group(1))


def _setup(db: str) -> tuple[str, str]:
    """The schema, an engineer member of a program with one product, and their token
    (through planning, in this process: the CLI would start six processes)."""
    migrate.upgrade(db)
    engine = make_engine(db)
    with unit_of_work(make_sessionmaker(engine)) as session:
        access.create_user(session, SETUP, "mem-eng", Role.engineer)
        token = access.create_token(session, SETUP, "mem-eng", "memory")
        prog = catalog.create_program(session, SETUP, s.ProgramCreate(name="Memory"))
        access.grant(session, SETUP, "mem-eng", prog.id, Role.engineer)
        product = catalog.create_product(session, SETUP, s.ProductCreate(
            program_id=prog.id, name="Box"))
        product_id = product.id
    engine.dispose()
    return token, str(product_id)


def _port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def test_a_long_record_upload_keeps_the_server_memory_bounded(fresh_db_url, tmp_path):
    db = fresh_db_url
    token, product_id = _setup(db)

    n = int(MINUTES * 60 * FS)
    path = tmp_path / "long.npy"
    out = np.lib.format.open_memmap(path, mode="w+", dtype="<f8", shape=(n, 3))
    rng = np.random.default_rng(19)
    for i in range(0, n, 1 << 20):  # written in pieces: the test holds no whole record
        m = min(1 << 20, n - i)
        out[i:i + m] = rng.standard_normal((m, 3)) * np.array([1.0, 2.0, 0.5])
    out.flush()
    del out
    record_bytes = n * 3 * 8
    assert path.stat().st_size > 50 * 1024 ** 2  # over the ordinary upload limit

    port = _port()
    server = subprocess.Popen([str(BIN / "qualplan"), "serve", "--port", str(port), "--db", db],
                              env={**os.environ, "QUALPLAN_ACTOR": "mem-eng"},
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        base = f"http://127.0.0.1:{port}/api/v1"
        wait_for_health(base, server, 60)
        headers = {"Authorization": f"Bearer {token}"}
        idle = _rss_anon_kb(server.pid)
        peak, stop = [idle], threading.Event()

        def sample() -> None:
            while not stop.is_set():
                peak[0] = max(peak[0], _rss_anon_kb(server.pid))
                time.sleep(0.01)

        watcher = threading.Thread(target=sample, daemon=True)
        watcher.start()
        t0 = time.perf_counter()
        try:
            with open(path, "rb") as fh:  # httpx streams the file from disk
                r = httpx.post(base + "/environments/upload", headers=headers, timeout=300,
                               files={"file": ("long.npy", fh, "application/octet-stream")},
                               data={"product_id": product_id, "kind": "time_history",
                                     "axis": "all", "value_units": "g",
                                     "sample_rate_hz": str(FS), "channel_axes": "X,Y,Z",
                                     "name": "long record"})
        finally:
            stop.set()
            watcher.join()
        wall = time.perf_counter() - t0
        assert r.status_code == 201, r.text[:1000]
        rev = httpx.get(f"{base}/environments/{r.json()['id']}/revisions",
                        headers=headers).json()["items"][0]
        rec = rev["spec"]["record"]
        assert (rec["n_samples"], rec["n_channels"]) == (n, 3)
        assert rec["n_chunks"] > 1
        grown = (peak[0] - idle) * 1024
        print(f"\nupload of {record_bytes / 1e6:.0f} MB in {wall:.1f} s; server RssAnon idle "
              f"{idle / 1024:.0f} MiB, peak {peak[0] / 1024:.0f} MiB (+{grown / 1e6:.1f} MB)")
        assert grown < record_bytes / 2, (
            f"the server grew by {grown / 1e6:.1f} MB during the upload of a "
            f"{record_bytes / 1e6:.0f} MB record (bound {record_bytes / 2e6:.0f} MB)")
    finally:
        server.terminate()
        try:
            server.wait(20)
        except subprocess.TimeoutExpired:
            server.kill()
