"""Fault tests: kill -9 of a CLI import, and of the server during an upload and during a
derivation, on the run's database (SQLite or PostgreSQL). Afterwards `qualplan db verify`
passes, SQLite's `PRAGMA integrity_check` answers ok, and the audit runs.

Every subprocess is bounded in time; a kill that came too late (the work had finished)
still checks the database, and each test asserts that at least one kill hit work in
progress.
"""

from __future__ import annotations

import contextlib
import io
import os
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time
from pathlib import Path

import httpx
import numpy as np
import pytest
from sqlalchemy.engine import make_url

from qualplan.cli import main
from tests.served import wait_for_health

ROOT = Path(__file__).resolve().parents[2]
QP = [sys.executable, "-m", "qualplan.cli"]
# Invented flat 20-2000 Hz spectrum (0.04 g^2/Hz: 8.9 g rms by the rectangle rule).
PSD = '{"freq_hz": [20, 2000], "asd_g2_hz": [0.04, 0.04]}'


def cli(url: str, *args: str) -> subprocess.CompletedProcess:
    """Run a qualplan command in this process (the processes killed are subprocesses;
    the setup and the checks after them need no process start of their own)."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            main([*args, "--db", url])
            code = 0
        except SystemExit as exc:
            code = int(exc.code or 0)
    return subprocess.CompletedProcess(args, code, out.getvalue(), err.getvalue())


@pytest.fixture
def db(fresh_db_url):
    for args in (("init",), ("program", "add", "Kill test"), ("product", "add", "Unit"),
                 ("env", "add", "flight random", "--product", "Unit", "--kind", "random",
                  "--axis", "Z", "--data", PSD)):
        out = cli(fresh_db_url, *args)
        assert out.returncode == 0, (args, out.stderr)
    return fresh_db_url


def assert_consistent(url: str) -> None:
    """db verify passes, the SQLite file is sound, the audit runs (no traceback)."""
    out = cli(url, "db", "verify")
    assert out.returncode == 0, out.stdout + out.stderr
    assert "ok:" in out.stdout
    parsed = make_url(url)
    if parsed.drivername.startswith("sqlite"):
        con = sqlite3.connect(parsed.database)
        try:
            assert con.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        finally:
            con.close()
    audit = cli(url, "audit")
    assert audit.returncode in (0, 1), audit.stderr   # 1: not every requirement verified
    assert "Traceback" not in audit.stderr and "error:" not in audit.stderr


def _kill(proc: subprocess.Popen) -> bool:
    """kill -9; True when the process was still running (the kill hit work in progress)."""
    running = proc.poll() is None
    if running:
        proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    return running


# --- the CLI -----------------------------------------------------------------------------


def test_kill9_of_a_cli_record_import(db, tmp_path):
    rng = np.random.default_rng(9)
    rec = tmp_path / "flight.npy"
    np.save(rec, rng.standard_normal((600_000, 2)))   # 9.6 MB, 2 channels
    hits = 0
    for delay in (1.0, 2.5):
        proc = subprocess.Popen(
            [*QP, "record", "import", str(rec), "--channel-axes", "X,Y", "--unit", "g",
             "--fs-hz", "10000", "--product", "Unit", "--name", f"flight {delay}",
             "--chunk-samples", "16384", "--db", db],
            cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(delay)
        hits += _kill(proc)
        assert_consistent(db)
    assert hits >= 1, "every import had finished before its kill: make the record longer"


# --- the server --------------------------------------------------------------------------


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    def __init__(self, url: str, tmp_path: Path) -> None:
        self.url, self.port = url, _free_port()
        self.base = f"http://127.0.0.1:{self.port}/api/v1"
        self.log = open(tmp_path / f"serve-{self.port}.log", "w")  # noqa: SIM115
        self.proc = subprocess.Popen(
            [*QP, "serve", "--port", str(self.port), "--db", url], cwd=ROOT,
            stdout=self.log, stderr=subprocess.STDOUT,
            env={**os.environ, "QUALPLAN_WEB_SECRET": "fault-test-secret"})
        try:
            wait_for_health(self.base, self.proc, 60, tmp_path / f"serve-{self.port}.log")
        except AssertionError:
            self.proc.kill()
            raise

    def kill(self) -> bool:
        hit = _kill(self.proc)
        self.log.close()
        return hit


@pytest.fixture
def token(db):
    """An API token of eve, an engineer and a member of the program (a user sees only the
    programs it is a member of)."""
    assert cli(db, "user", "add", "eve", "--role", "engineer").returncode == 0
    out = cli(db, "user", "grant", "eve", "--role", "engineer", "--program", "Kill test")
    assert out.returncode == 0, out.stderr
    out = cli(db, "token", "create", "eve")
    assert out.returncode == 0, out.stderr
    return out.stdout.strip().splitlines()[-1]


def _ids(base: str, headers: dict) -> tuple[int, int, int]:
    env = httpx.get(f"{base}/environments", headers=headers, timeout=30).json()["items"][0]
    rev = httpx.get(f"{base}/environments/{env['id']}/revisions", headers=headers,
                    timeout=30).json()["items"][0]
    pols = httpx.get(f"{base}/policies", params={"limit": 500}, headers=headers,
                     timeout=30).json()["items"]
    return env["product_id"], rev["id"], pols[0]["id"]


def test_kill9_of_the_server_during_an_upload(db, token, tmp_path):
    """The body is still arriving (sent slowly) when the server is killed."""
    server = Server(db, tmp_path)
    headers = {"Authorization": f"Bearer {token}"}
    unit_id, _, _ = _ids(server.base, headers)
    lines = [b"time_s,accel_g\n"] + [f"{i / 1000:.3f},{np.sin(i / 7):.6f}\n".encode()
                                     for i in range(200_000)]
    boundary = b"qpfaultboundary"

    def body():
        yield (b"--" + boundary + b"\r\nContent-Disposition: form-data; name=\"product_id\""
               b"\r\n\r\n" + str(unit_id).encode() + b"\r\n")
        for name, value in (("name", b"slow upload"), ("kind", b"time_history"),
                            ("axis", b"Z")):
            yield (b"--" + boundary + b"\r\nContent-Disposition: form-data; name=\""
                   + name.encode() + b"\"\r\n\r\n" + value + b"\r\n")
        yield (b"--" + boundary + b"\r\nContent-Disposition: form-data; name=\"file\"; "
               b"filename=\"th.csv\"\r\nContent-Type: text/csv\r\n\r\n")
        for i in range(0, len(lines), 2000):
            yield b"".join(lines[i:i + 2000])
            time.sleep(0.05)
        yield b"\r\n--" + boundary + b"--\r\n"

    errors = []

    def send():
        try:
            httpx.post(f"{server.base}/environments/upload", content=body(), timeout=60,
                       headers={**headers, "Content-Type":
                                "multipart/form-data; boundary=qpfaultboundary"})
        except httpx.HTTPError as exc:
            errors.append(exc)

    t = threading.Thread(target=send)
    t.start()
    time.sleep(1.0)
    hit = server.kill()
    t.join(timeout=90)
    assert hit and errors, "the upload was not in progress when the server was killed"
    assert_consistent(db)
    envs = cli(db, "env", "list")
    assert "slow upload" not in envs.stdout


def test_kill9_of_the_server_during_derivations(db, token, tmp_path):
    hits = 0
    for delay in (0.3, 0.8):
        server = Server(db, tmp_path)
        headers = {"Authorization": f"Bearer {token}"}
        unit_id, rev_id, policy_id = _ids(server.base, headers)
        recipe = {"product_id": unit_id, "name": "random Z", "grade": "qualification",
                  "kind": "random", "axis": "Z", "revision_ids": [rev_id],
                  "policy_id": policy_id}

        def derive(base=server.base, recipe=recipe, headers=headers):
            for _ in range(20):
                try:
                    httpx.post(f"{base}/levels", json=recipe, headers=headers, timeout=60)
                except httpx.HTTPError:
                    return

        threads = [threading.Thread(target=derive) for _ in range(3)]
        for t in threads:
            t.start()
        time.sleep(delay)
        hits += server.kill()
        for t in threads:
            t.join(timeout=90)
        assert_consistent(db)
    assert hits == 2
