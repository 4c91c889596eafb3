"""Per-program membership through the API: another program's data is not found (404),
lists are filtered, a member's role decides (403), grants by admin or approver only."""

from __future__ import annotations

import pytest

from qualplan.planning.schemas import Role
from tests.api.conftest import GEVS_ACC, Api, Caller, make_token, unique


@pytest.fixture
def two(client, factory, admin):
    """Programs A and B, each with a unit, an environment and a requirement; engineer
    `a` is a member of A only, engineer `b` of B only."""
    out = {}
    for side in ("a", "b"):
        name, token = make_token(factory, Role.engineer)
        api = Api(client, Caller(name, token))
        prog = api.post("/programs", {"name": unique(f"prog-{side}")}).json()
        unit = api.post("/products", {"program_id": prog["id"], "name": "unit"}).json()
        env = api.post("/environments", {"product_id": unit["id"], "name": "launch",
                                         "kind": "random", "axis": "Z", "data": GEVS_ACC}
                       ).json()
        req = api.post("/requirements", {"program_id": prog["id"], "key": unique("REQ"),
                                         "text": "random Z", "product_id": unit["id"],
                                         "method": "test"}).json()
        out[side] = {"api": api, "name": name, "program": prog, "unit": unit, "env": env,
                     "req": req}
    return out


def test_another_programs_rows_are_not_found(two):
    a, b = two["a"], two["b"]
    for path in (f"/programs/{b['program']['id']}", f"/products/{b['unit']['id']}",
                 f"/environments/{b['env']['id']}", f"/requirements/{b['req']['id']}",
                 f"/programs/{b['program']['id']}/products",
                 f"/programs/{b['program']['id']}/members"):
        r = a["api"].get(path, expect=None)
        assert r.status_code == 404, (path, r.status_code, r.text[:300])
        assert r.headers["content-type"] == "application/problem+json"
    # the owner reads them
    assert b["api"].get(f"/environments/{b['env']['id']}").json()["id"] == b["env"]["id"]


def test_writes_into_another_program_are_refused_and_store_nothing(two):
    a, b = two["a"], two["b"]
    r = a["api"].post("/products", {"program_id": b["program"]["id"], "name": "intruder"},
                      expect=None)
    assert r.status_code == 404
    r = a["api"].patch(f"/programs/{b['program']['id']}", {"description": "mine"},
                       expect=None, headers={"If-Match": '"1"'})
    assert r.status_code == 404
    r = a["api"].post(f"/environments/{b['env']['id']}/revisions",
                      {"data": {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01]}},
                      expect=None)
    assert r.status_code == 404
    products = b["api"].get(f"/programs/{b['program']['id']}/products").json()
    assert [p["name"] for p in products["items"]] == ["unit"]
    assert b["api"].get(f"/programs/{b['program']['id']}").json()["description"] == ""


def test_lists_show_only_member_programs(two, admin):
    a, b = two["a"], two["b"]
    seen = {p["id"] for p in a["api"].get("/programs", params={"limit": 500}).json()["items"]}
    assert a["program"]["id"] in seen and b["program"]["id"] not in seen
    reqs = a["api"].get("/requirements", params={"limit": 500}).json()["items"]
    assert b["req"]["id"] not in {r["id"] for r in reqs}
    assert a["req"]["id"] in {r["id"] for r in reqs}
    # an admin sees both
    every = {p["id"] for p in admin.get("/programs", params={"limit": 500}).json()["items"]}
    assert {a["program"]["id"], b["program"]["id"]} <= every


def test_a_member_of_no_program_sees_no_rows(two, client, factory):
    """The row scope of a user without any membership (an empty set of programs) hides
    every program's rows, lists and single rows alike (common practice: deny by default)."""
    a = two["a"]
    nobody = Api(client, Caller(*make_token(factory, Role.viewer)))
    for path in ("/programs", "/requirements", "/environments"):
        assert nobody.get(path, params={"limit": 500}).json()["items"] == [], path
    for path in (f"/programs/{a['program']['id']}", f"/requirements/{a['req']['id']}",
                 f"/environments/{a['env']['id']}",
                 f"/environments/{a['env']['id']}/revisions"):
        assert nobody.get(path, expect=None).status_code == 404, path


def test_audit_scoped_to_another_programs_product_is_refused(two, admin):
    a, b = two["a"], two["b"]
    # even an admin, who sees both, may not audit program A over B's product
    r = admin.get("/audit", params={"program_id": a["program"]["id"],
                                    "product_id": b["unit"]["id"]}, expect=None)
    assert r.status_code == 422 and r.json()["field"] == "product_id", r.text[:300]
    r = a["api"].get("/audit", params={"program_id": a["program"]["id"],
                                       "product_id": b["unit"]["id"]}, expect=None)
    assert r.status_code in (404, 422), r.text[:300]
    r = a["api"].get("/audit", params={"program_id": b["program"]["id"]}, expect=None)
    assert r.status_code == 404


def test_membership_role_decides_and_grants_need_an_approver(two, admin):
    a, b = two["a"], two["b"]
    pid = b["program"]["id"]
    # b (engineer) may not grant; a viewer member may read but not write
    r = b["api"].put(f"/programs/{pid}/members/{a['name']}", {"role": "viewer"}, expect=None)
    assert r.status_code == 403
    admin.put(f"/programs/{pid}/members/{a['name']}", {"role": "viewer"})
    assert a["api"].get(f"/environments/{b['env']['id']}").status_code == 200
    r = a["api"].post("/products", {"program_id": pid, "name": "x"}, expect=None)
    assert r.status_code == 403 and "viewer" in r.json()["detail"]
    # the admin makes b approver of B; b then promotes a to engineer
    admin.put(f"/programs/{pid}/members/{b['name']}", {"role": "approver"})
    b["api"].put(f"/programs/{pid}/members/{a['name']}", {"role": "engineer"})
    a["api"].post("/products", {"program_id": pid, "name": "added by a"})
    members = dict((m["user"], m["role"]) for m in
                   a["api"].get(f"/programs/{pid}/members").json())
    assert members == {a["name"]: "engineer", b["name"]: "approver"}
    # admin is not a program role
    r = admin.put(f"/programs/{pid}/members/{a['name']}", {"role": "admin"}, expect=None)
    assert r.status_code == 422
    # revoking ends a's access at once
    b["api"].request("DELETE", f"/programs/{pid}/members/{a['name']}", expect=204)
    assert a["api"].get(f"/environments/{b['env']['id']}", expect=None).status_code == 404


def test_event_log_shows_only_the_callers_programs(two, admin):
    a, b = two["a"], two["b"]
    rows = a["api"].get("/events", params={"limit": 500}).json()["items"]
    seen = {(e["entity"], e["entity_id"]) for e in rows}
    assert ("program", a["program"]["id"]) in seen
    assert ("environment", a["env"]["id"]) in seen
    assert ("program", b["program"]["id"]) not in seen
    assert ("requirement", b["req"]["id"]) not in seen
    r = a["api"].get("/events", params={"entity": "program",
                                        "entity_id": b["program"]["id"]}).json()
    assert r["total"] == 0 and r["items"] == []
    every = admin.get("/events", params={"entity": "program",
                                         "entity_id": b["program"]["id"]}).json()
    assert every["total"] >= 1
