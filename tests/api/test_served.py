"""The fixed point outside checks rely on, through the real server: `qualplan serve`
answers GET /api/v1/requirements with 401 without a valid token and 200 with one.

The token is made by the same use case `qualplan token create` calls
(planning.access.create_token), in-process: each CLI start costs seconds here."""

from __future__ import annotations

import socket
import subprocess
import sys
from pathlib import Path

import httpx
import pytest

from qualplan.planning.schemas import Role
from qualplan.store import migrate
from qualplan.store.session import make_engine, make_sessionmaker
from tests.api.conftest import make_token
from tests.served import wait_for_health

QP = str(Path(sys.executable).parent / "qualplan")


@pytest.mark.slow
def test_served_api_needs_a_token(fresh_db_url, tmp_path):
    migrate.upgrade(fresh_db_url)
    engine = make_engine(fresh_db_url)
    _name, token = make_token(make_sessionmaker(engine), Role.viewer, "ada")
    engine.dispose()
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        port = sock.getsockname()[1]
    log = open(tmp_path / "serve.log", "w")  # noqa: SIM115
    server = subprocess.Popen([QP, "serve", "--host", "127.0.0.1", "--port", str(port),
                               "--db", fresh_db_url], stdout=log, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}/api/v1"
    try:
        wait_for_health(base, server, 30, tmp_path / "serve.log")
        r = httpx.get(f"{base}/requirements")
        assert r.status_code == 401 and r.headers["www-authenticate"] == "Bearer"
        bad = httpx.get(f"{base}/requirements", headers={"Authorization": "Bearer qp_nope"})
        assert bad.status_code == 401
        ok = httpx.get(f"{base}/requirements", headers={"Authorization": f"Bearer {token}"})
        assert ok.status_code == 200 and ok.json()["total"] == 0
    finally:
        server.terminate()
        server.wait(timeout=10)
        log.close()
