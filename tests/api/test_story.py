"""Use cases through the API on a real database: environments -> level -> requirement ->
evidence -> audit, and the stale path (a new environment revision after verification)."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from qualplan.dynamics import psd
from tests.api.conftest import GEVS_ACC, GEVS_QUAL, share, unique

# Invented environments of a demo unit (the same shapes as tests/planning/test_story.py).
ROAD_Z = {"freq_hz": [10.0, 40.0, 500.0], "asd_g2_hz": [0.015, 0.015, 0.00015]}
FLIGHT_Z = {"freq_hz": [20.0, 80.0, 350.0, 2000.0], "asd_g2_hz": [0.002, 0.01, 0.01, 0.001]}
FLIGHT_Z2 = {**FLIGHT_Z, "asd_g2_hz": [0.003, 0.015, 0.015, 0.0015]}


@pytest.fixture
def drone(eng):
    """A program, a unit, two phases and two random environments on Z."""
    program = eng.post("/programs", {"name": unique("drone")}).json()
    share(eng, program["id"])
    pid = program["id"]
    unit = eng.post("/products", {"program_id": pid, "name": "camera electronics",
                                  "mass_kg": 2.4}).json()
    road = eng.post("/phases", {"program_id": pid, "name": "road", "duration_s": 3600.0,
                                "occurrences": 2}).json()
    flight = eng.post("/phases", {"program_id": pid, "name": "flight", "duration_s": 1800.0,
                                  "occurrences": 100, "position": 1}).json()

    def env(name, phase, data):
        return eng.post("/environments", {
            "product_id": unit["id"], "phase_id": phase["id"], "name": name, "kind": "random",
            "axis": "Z", "source": "invented demo data", "data": data}).json()

    road_env, flight_env = env("road Z", road, ROAD_Z), env("flight Z", flight, FLIGHT_Z)
    policy = next(p for p in eng.get("/policies").json()["items"]
                  if p["name"] == "spaceflight-gevs")
    return {"program": program, "unit": unit, "road": road_env, "flight": flight_env,
            "policy": policy}


def _revision_id(api, env) -> int:
    return api.get(f"/environments/{env['id']}/revisions").json()["items"][-1]["id"]


def _derive(api, d, **kw):
    body = {"product_id": d["unit"]["id"], "name": "random Z", "kind": "random", "axis": "Z",
            "revision_ids": [_revision_id(api, d["road"]), _revision_id(api, d["flight"])],
            "policy_id": d["policy"]["id"], **kw}
    return api.post("/levels", body).json()


def _audit(api, d):
    return api.get("/audit", params={"program_id": d["program"]["id"]}).json()


def test_environment_history_and_compare(eng, viewer, world):
    env = world["env"]
    assert env["latest_revision"] == 1
    r = viewer.get(f"/environments/{env['id']}")
    assert r.headers["ETag"] == '"1"'
    # a revision from an older one is refused, If-Match or expected_revision alike
    eng.post(f"/environments/{env['id']}/revisions", {"data": GEVS_QUAL, "note": "qual"},
             headers={"If-Match": '"1"'})
    eng.post(f"/environments/{env['id']}/revisions", {"data": GEVS_ACC, "note": "back"},
             headers={"If-Match": '"1"'}, expect=412)
    eng.post(f"/environments/{env['id']}/revisions",
             {"data": GEVS_ACC, "expected_revision": 1}, expect=412)
    r = eng.post(f"/environments/{env['id']}/revisions", {"data": GEVS_QUAL}, expect=409)
    assert "identical" in r.json()["detail"]
    hist = viewer.get(f"/environments/{env['id']}/revisions").json()
    assert [h["number"] for h in hist["items"]] == [1, 2]
    # printed 10.0 g rms (GSFC-STD-7000 Table 2.4-3), recomputed 9.9954 g rms
    assert hist["items"][0]["summary"]["grms"]["value"] == pytest.approx(9.9954, rel=1e-4)
    cmp = viewer.get(f"/environments/{env['id']}/compare", params={"a": 1, "b": 2}).json()
    # qualification = 2 x acceptance in PSD: +10 log10(2) dB everywhere (closed form)
    assert cmp["max_difference_db"] == pytest.approx(10 * math.log10(2), abs=1e-9)
    viewer.get(f"/environments/{env['id']}/compare", params={"a": 1, "b": 9}, expect=404)
    listed = viewer.get("/environments", params={"product_id": world["unit"]["id"],
                                                 "kind": "random", "axis": "Z"}).json()
    assert listed["total"] == 1 and listed["items"][0]["latest_revision"] == 2
    assert viewer.get("/environments", params={"product_id": world["unit"]["id"],
                                               "axis": "X"}).json()["total"] == 0


def test_product_tree(eng, viewer, world):
    pid = world["program"]["id"]
    board = eng.post("/products", {"program_id": pid, "name": "board",
                                   "parent_id": world["unit"]["id"]}).json()
    tree = viewer.get(f"/programs/{pid}/products/tree").json()
    assert tree[0]["product"]["name"] == "unit"
    assert tree[0]["children"][0]["product"]["id"] == board["id"]
    assert viewer.get(f"/programs/{pid}/products").json()["total"] == 2


def test_full_story_verified_then_stale(eng, viewer, drone):
    # An acceptance level: a workmanship screen, its coverage of the life is not asked (a
    # qualification level must cover it: tests/api/test_margins_api.py).
    level = _derive(eng, drone, grade="acceptance")
    # GEVS acceptance: the limit level, 1 min per axis (GSFC-STD-7000B, from memory)
    assert level["result"]["duration_s"] == 60.0 and not level["stale"]
    req = eng.post("/requirements", {
        "program_id": drone["program"]["id"], "key": "ENV-001",
        "text": "Survive qualification random vibration, Z", "product_id": drone["unit"]["id"],
        "level_id": level["id"], "method": "test"}).json()
    assert req["status"] == "open"
    assert _audit(viewer, drone)["release_ready"] is False
    r = level["result"]
    # the achieved control spectrum equals the demand, on 1/48-octave controller lines
    f = r["freq_hz"]
    lines = np.geomspace(f[0], f[-1], int(48 * np.log2(f[-1] / f[0])) + 1)
    values = psd.asd_at(f, r["asd_g2_hz"], lines)
    ev = eng.post(f"/requirements/{req['id']}/evidence/test", {
        "freq_hz": lines.tolist(), "values": values.tolist(),
        "duration_s": r["duration_s"]}).json()
    assert ev["verdict"] == "pass", ev["summary"]
    assert viewer.get(f"/requirements/{req['id']}/status").json()["status"] == "verified"
    report = _audit(viewer, drone)
    assert report["release_ready"] and report["counts"]["verified"] == 1
    # the stale path: new flight data after verification
    eng.post(f"/environments/{drone['flight']['id']}/revisions",
             {"data": FLIGHT_Z2, "note": "new flight data"}, headers={"If-Match": '"1"'})
    st = viewer.get(f"/requirements/{req['id']}/status").json()
    assert st["status"] == "stale" and "flight Z" in st["reason"]
    assert viewer.get(f"/levels/{level['id']}").json()["stale"] is True
    report = _audit(viewer, drone)
    assert not report["release_ready"] and report["counts"]["stale"] == 1


def test_analysis_story_verified_then_stale(eng, viewer, drone):
    """The same story with an analysis level and analysis evidence (MS >= 0)."""
    level = _derive(eng, drone, purpose="analysis", name="loads Z", load_factor_fn_hz=150.0)
    lf = level["result"]["load_factor"]
    # Miles beside: g rms = sqrt(pi/2 fn Q G(fn)) (Miles 1954); the load factor is 3 sigma
    # of the exact SDOF response (tests/planning/test_exposure.py checks it)
    assert lf["miles_grms"] == pytest.approx(
        math.sqrt(math.pi / 2 * 150 * 10 * lf["asd_at_fn_g2_hz"]), rel=1e-9)
    assert lf["three_sigma_g"] == pytest.approx(3 * lf["exact_grms"], rel=1e-12)
    got = viewer.get(f"/levels/{level['id']}").json()
    assert got["level_hash"] == level["level_hash"] and got["stale"] is False
    listed = viewer.get("/levels", params={"product_id": drone["unit"]["id"]}).json()
    assert [x["id"] for x in listed["items"]] == [level["id"]]
    req = eng.post("/requirements", {
        "program_id": drone["program"]["id"], "key": "STR-001", "text": "Bracket stress",
        "product_id": drone["unit"]["id"], "level_id": level["id"], "method": "analysis",
        "required_margin": 0.0}).json()
    # MS = 276 / (1.25 x 180) - 1 = +0.2267 (closed form)
    ev = eng.post(f"/requirements/{req['id']}/evidence/analysis", {
        "applied": 180.0, "allowable": 276.0, "units": "MPa", "factor_of_safety": 1.25}).json()
    assert ev["achieved_margin"] == pytest.approx(276 / (1.25 * 180) - 1)
    assert ev["level_hash"] == level["level_hash"]
    assert eng.get(f"/requirements/{req['id']}").json()["status"] == "verified"
    assert _audit(viewer, drone)["release_ready"] is True
    ev_list = viewer.get(f"/requirements/{req['id']}/evidence").json()
    assert ev_list["total"] == 1
    # stale path: a new revision of an input after verification
    eng.post(f"/environments/{drone['flight']['id']}/revisions",
             {"data": FLIGHT_Z2, "note": "new flight data", "expected_revision": 1})
    st = viewer.get(f"/requirements/{req['id']}/status").json()
    assert st["status"] == "stale" and "flight Z" in st["reason"]
    report = _audit(viewer, drone)
    assert report["release_ready"] is False and report["counts"]["stale"] == 1
    assert "NOT READY" in report["verdict"]
    scoped = viewer.get("/audit", params={"program_id": drone["program"]["id"],
                                          "product_id": drone["unit"]["id"]}).json()
    assert scoped["counts"]["stale"] == 1


def test_waiver_by_approver_only(eng, approver, viewer, drone):
    req = eng.post("/requirements", {
        "program_id": drone["program"]["id"], "key": "INS-001", "text": "Connector savers",
        "product_id": drone["unit"]["id"], "method": "inspection"}).json()
    ev = eng.post(f"/requirements/{req['id']}/evidence/inspection",
                  {"passed": False, "note": "savers missing"}).json()
    assert ev["verdict"] == "fail"
    assert viewer.get(f"/requirements/{req['id']}").json()["status"] == "failed"
    body = {"rationale": "accepted by the customer board",
            "expires_at": (datetime.now(UTC) + timedelta(days=10)).isoformat()}
    eng.post(f"/requirements/{req['id']}/waivers", body, expect=403)
    w = approver.post(f"/requirements/{req['id']}/waivers", body).json()
    assert w["approver"] == approver.caller.name
    assert viewer.get(f"/requirements/{req['id']}/status").json()["status"] == "waived"
    assert _audit(viewer, drone)["release_ready"] is True
    r = approver.post(f"/requirements/{req['id']}/waivers",
                      {**body, "expires_at": "2001-01-01T00:00:00Z"}, expect=422)
    assert r.json()["field"] == "expires_at"
    approver.post(f"/waivers/{w['id']}/revoke", expect=200)
    approver.post(f"/waivers/{w['id']}/revoke", expect=409)
    assert viewer.get(f"/requirements/{req['id']}/status").json()["status"] == "failed"


def test_similarity_needs_a_verified_requirement(eng, drone):
    pid, uid = drone["program"]["id"], drone["unit"]["id"]
    a = eng.post("/requirements", {"program_id": pid, "key": "A", "text": "a", "product_id": uid,
                                   "method": "inspection"}).json()
    b = eng.post("/requirements", {"program_id": pid, "key": "B", "text": "b", "product_id": uid,
                                   "method": "similarity"}).json()
    claim = {"similar_requirement_id": a["id"], "rationale": "same board, same mounting"}
    eng.post(f"/requirements/{b['id']}/evidence/similarity", claim, expect=409)
    eng.post(f"/requirements/{a['id']}/evidence/inspection", {"passed": True, "note": "fits"})
    eng.post(f"/requirements/{b['id']}/evidence/similarity", claim)
    assert eng.get(f"/requirements/{b['id']}/status").json()["status"] == "verified"
    page = eng.get("/requirements", params={"program_id": pid}).json()
    assert [x["key"] for x in page["items"]] == ["A", "B"]
    assert eng.get("/requirements", params={"product_id": uid}).json()["total"] == 2


def test_policy_copy_and_rule_edit_turns_levels_stale(eng, viewer, drone):
    level = _derive(eng, drone, purpose="analysis", name="loads")
    src = drone["policy"]
    copy = eng.post(f"/policies/{src['id']}/copy", {"name": unique("my-gevs")}).json()
    assert copy["copied_from_id"] == src["id"] and copy["version"] == 1
    level = _derive(eng, drone, purpose="analysis", name="loads", policy_id=copy["id"])
    rules = viewer.get(f"/policies/{copy['id']}").json()["rules"]
    rules["analysis"]["margin_db"] = 6.0
    eng.put(f"/policies/{copy['id']}/rules", {"rules": rules}, expect=428)
    r = eng.put(f"/policies/{copy['id']}/rules", {"rules": rules}, headers={"If-Match": '"1"'})
    assert r.headers["ETag"] == '"2"'
    eng.put(f"/policies/{copy['id']}/rules", {"rules": rules}, headers={"If-Match": '"1"'},
            expect=412)
    got = viewer.get(f"/levels/{level['id']}").json()
    assert got["stale"] and "policy" in got["stale_reasons"][0]
    rules["random"]["qualification"]["margin_db"] = "lots"
    r = eng.put(f"/policies/{copy['id']}/rules", {"rules": rules}, headers={"If-Match": '"2"'},
                expect=422)
    assert r.json()["field"] == "rules.random.qualification.margin_db"


def test_event_log_records_who_did_what(eng, viewer, world):
    env = world["env"]
    eng.post(f"/environments/{env['id']}/revisions", {"data": GEVS_QUAL, "note": "raised"})
    page = viewer.get("/events", params={"entity": "environment", "entity_id": env["id"]}).json()
    actions = [e["action"] for e in page["items"]]
    assert actions[0] == "revise" and "create" in actions  # newest first
    assert page["items"][0]["actor"] == eng.caller.name
    assert page["items"][0]["detail"]["revision"] == 2
    one = viewer.get("/events", params={"entity": "environment", "entity_id": env["id"],
                                        "offset": 1, "limit": 1}).json()
    assert one["total"] == page["total"] and one["items"][0]["id"] == page["items"][1]["id"]

