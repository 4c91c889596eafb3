"""The API on the run's migrated database (SQLite or PostgreSQL), with one token per role.

Requests commit for real (one unit of work per request), so every test makes its own
rows under unique names and never depends on rows of another test.
"""

from __future__ import annotations

import uuid
from dataclasses import dataclass

import pytest
from fastapi.testclient import TestClient

from qualplan.api.app import create_app
from qualplan.config import Settings
from qualplan.planning import access, policies
from qualplan.planning.access import Actor
from qualplan.planning.schemas import Role
from qualplan.store.session import make_sessionmaker, unit_of_work

API = "/api/v1"
MAX_UPLOAD = 64 * 1024
SETUP = Actor("test-setup", Role.admin)

# GSFC-STD-7000 (GEVS) Table 2.4-3 component acceptance and qualification random levels
# (GSFC-STD-7000 Table 2.4-3): 10.0 and 14.1 g rms printed.
GEVS_ACC = {"freq_hz": [20.0, 50.0, 800.0, 2000.0], "asd_g2_hz": [0.013, 0.08, 0.08, 0.013]}
GEVS_QUAL = {"freq_hz": [20.0, 50.0, 800.0, 2000.0], "asd_g2_hz": [0.026, 0.16, 0.16, 0.026]}


def unique(stem: str) -> str:
    return f"{stem}-{uuid.uuid4().hex[:8]}"


@pytest.fixture(scope="session")
def factory(engine):
    return make_sessionmaker(engine)


@pytest.fixture(scope="session")
def app(db_url, factory, tmp_path_factory):
    application = create_app(Settings(database_url=db_url, max_upload_bytes=MAX_UPLOAD,
                                      job_files_dir=tmp_path_factory.mktemp("job-files")))
    with unit_of_work(factory) as session:
        policies.ensure_default_policies(session, SETUP)
    return application


@pytest.fixture(scope="session")
def client(app):
    with TestClient(app) as c:
        yield c


def make_token(factory, role: Role, name: str | None = None) -> tuple[str, str]:
    """A new user of `role` and a token for them: (user name, token)."""
    name = name or unique(role.value)
    with unit_of_work(factory) as session:
        access.create_user(session, SETUP, name, role)
        token = access.create_token(session, SETUP, name, "test")
    return name, token


@dataclass(frozen=True)
class Caller:
    name: str
    token: str | None

    @property
    def headers(self) -> dict[str, str]:
        return {"Authorization": f"Bearer {self.token}"} if self.token else {}


@pytest.fixture(scope="session")
def callers(factory) -> dict[str, Caller]:
    """A caller per role, plus no token and a revoked token."""
    out = {}
    for role in Role:
        out[role.value] = Caller(*make_token(factory, role))
    name, token = make_token(factory, Role.admin)
    with unit_of_work(factory) as session:
        access.revoke_token(session, SETUP, token[:10])
    out["revoked"] = Caller(name, token)
    out["none"] = Caller("nobody", None)
    out["garbage"] = Caller("nobody", "qp_not-a-real-token")
    CALLERS.update(out)
    return out


#: The callers of the run (filled by the `callers` fixture) for :func:`share`.
CALLERS: dict[str, Caller] = {}


def share(api: Api, program_id: int) -> None:
    """Make the approver and the viewer callers members of a program with their roles
    (the engineer who created it is a member already); granted by the admin."""
    admin = Api(api.client, CALLERS["admin"])
    for role in ("approver", "viewer"):
        admin.put(f"/programs/{program_id}/members/{CALLERS[role].name}", {"role": role},
                  expect=200)


class Api:
    """A client that talks as one caller and checks statuses."""

    def __init__(self, client: TestClient, caller: Caller) -> None:
        self.client, self.caller = client, caller

    def request(self, method: str, path: str, expect: int | None = None, **kw):
        headers = {**self.caller.headers, **kw.pop("headers", {})}
        r = self.client.request(method, API + path, headers=headers, **kw)
        if expect is not None:
            assert r.status_code == expect, (method, path, r.status_code, r.text[:2000])
        return r

    def get(self, path, expect=200, **kw):
        return self.request("GET", path, expect, **kw)

    def post(self, path, json=None, expect=201, **kw):
        return self.request("POST", path, expect, json=json, **kw)

    def patch(self, path, json=None, expect=200, **kw):
        return self.request("PATCH", path, expect, json=json, **kw)

    def put(self, path, json=None, expect=200, **kw):
        return self.request("PUT", path, expect, json=json, **kw)


@pytest.fixture
def eng(client, callers) -> Api:
    return Api(client, callers["engineer"])


@pytest.fixture
def approver(client, callers) -> Api:
    return Api(client, callers["approver"])


@pytest.fixture
def viewer(client, callers) -> Api:
    return Api(client, callers["viewer"])


@pytest.fixture
def admin(client, callers) -> Api:
    return Api(client, callers["admin"])


@pytest.fixture
def world(eng, callers) -> dict:
    """A program with a unit, a phase and a random environment, made through the API.

    The engineer creates it (and so is its member); the admin makes the approver and the
    viewer members with their roles (:func:`share`).
    """
    program = eng.post("/programs", {"name": unique("program")}).json()
    share(eng, program["id"])
    unit = eng.post("/products", {"program_id": program["id"], "name": "unit",
                                  "part_number": "U-1", "mass_kg": 2.0}).json()
    phase = eng.post("/phases", {"program_id": program["id"], "name": "launch",
                                 "duration_s": 120.0}).json()
    env = eng.post("/environments", {
        "product_id": unit["id"], "phase_id": phase["id"], "name": "launch random",
        "kind": "random", "axis": "Z", "source": "customer spec", "data": GEVS_ACC}).json()
    policy = eng.get("/policies", params={"limit": 500}).json()["items"]
    gevs = next(p for p in policy if p["name"] == "spaceflight-gevs")
    return {"program": program, "unit": unit, "phase": phase, "env": env, "policy": gevs}
