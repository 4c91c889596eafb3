"""A revision rewritten behind qualplan's back: the API refuses to serve it (500, problem
"Stored data corrupt", naming the row), on a database of its own."""

from __future__ import annotations

import json

from fastapi.testclient import TestClient
from sqlalchemy import text

from qualplan.api.app import create_app
from qualplan.config import Settings
from qualplan.planning import access
from qualplan.planning.schemas import Role
from qualplan.store import migrate
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work
from qualplan.store.triggers import create_append_only_guards, drop_append_only_guards
from tests.api.conftest import API, GEVS_ACC, SETUP


def test_rewritten_revision_answers_500_stored_data_corrupt(fresh_db_url):
    migrate.upgrade(fresh_db_url)
    engine = make_engine(fresh_db_url)
    with unit_of_work(make_sessionmaker(engine)) as session:
        access.create_user(session, SETUP, "eve", Role.engineer)
        token = access.create_token(session, SETUP, "eve", "test")
    headers = {"Authorization": f"Bearer {token}"}
    with TestClient(create_app(Settings(database_url=fresh_db_url))) as client:
        def call(method, path, **kw):
            return client.request(method, API + path, headers=headers, **kw)

        prog = call("POST", "/programs", json={"name": "Ridge drone"}).json()
        unit = call("POST", "/products", json={"program_id": prog["id"], "name": "U"}).json()
        env = call("POST", "/environments", json={
            "product_id": unit["id"], "name": "road", "kind": "random", "axis": "Z",
            "data": GEVS_ACC}).json()
        revs = call("GET", f"/environments/{env['id']}/revisions")
        assert revs.status_code == 200
        rev = revs.json()["items"][0]
        # someone with direct database access doubles the PSD and leaves the hash
        spec = {**rev["spec"], "asd_g2_hz": [2 * a for a in GEVS_ACC["asd_g2_hz"]]}
        with engine.begin() as conn:
            drop_append_only_guards(conn, "environment_revisions")
            conn.execute(text("UPDATE environment_revisions SET spec = :s WHERE id = :i"),
                         {"s": json.dumps(spec), "i": rev["id"]})
            create_append_only_guards(conn, "environment_revisions")
        r = call("GET", f"/environments/{env['id']}/revisions")
        assert r.status_code == 500
        body = r.json()
        assert r.headers["content-type"].startswith("application/problem+json")
        assert body["title"] == "Stored data corrupt"
        assert body["table"] == "environment_revisions" and body["row_id"] == rev["id"]
        assert f"environment_revisions id={rev['id']}" in body["detail"]
    engine.dispose()
