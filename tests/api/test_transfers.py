"""Environments down the product tree through the API: mounting, rule, transferred
environment, the environments that apply to a product (its parents' included)."""

from __future__ import annotations

import pytest

from tests.api.conftest import share, unique

FLAT = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04]}


@pytest.fixture
def pod(eng):
    program = eng.post("/programs", {"name": unique("pod program")}).json()
    share(eng, program["id"])
    pid = program["id"]
    pod = eng.post("/products", {"program_id": pid, "name": "pod", "mass_kg": 45.0}).json()
    unit = eng.post("/products", {"program_id": pid, "name": "computer",
                                  "parent_id": pod["id"], "mass_kg": 8.0}).json()
    envs = {ax: eng.post("/environments", {
        "product_id": pod["id"], "name": f"road {ax}", "kind": "random", "axis": ax,
        "data": FLAT}).json() for ax in "XYZ"}
    return {"program": program, "pod": pod, "unit": unit, "envs": envs}


def test_transfer_story(eng, viewer, pod):
    unit = pod["unit"]
    # today's list of a unit's environments omits its parents'; include_parents adds them
    own = eng.get("/environments", params={"product_id": unit["id"]}).json()
    assert own["total"] == 0
    applies = eng.get("/environments", params={"product_id": unit["id"],
                                               "include_parents": True}).json()
    assert {e["name"] for e in applies["items"]} == {"road X", "road Y", "road Z"}

    eng.put(f"/products/{unit['id']}/mounting", {"axes": {"X": "-Z", "Y": "X", "Z": "-Y"}})
    rule = eng.post("/transfer-rules", {
        "program_id": pod["program"]["id"], "name": "shelf", "kind": "zone_transmissibility",
        "spec": {"freq_hz": [20.0, 200.0, 2000.0], "gain": [1.0, 2.0, 1.0]}, "basis": "analysis",
        "provenance": "invented zone response"}).json()
    assert rule["revision"] == 1
    rev = eng.post("/transferred-environments", {
        "product_id": unit["id"], "name": "road X shelf", "axis": "X",
        "parent_environment_ids": [pod["envs"]["Z"]["id"]], "rule_ids": [rule["id"]]}).json()
    assert rev["number"] == 1
    assert max(rev["spec"]["asd_g2_hz"]) == pytest.approx(0.16)  # 0.04 x |T|^2 = 4
    rows = {r["name"]: r for r in viewer.get(f"/products/{unit['id']}/environments").json()}
    assert rows["road X shelf"]["origin"] == "transferred"
    assert rows["road Z"]["origin"] == "replaced"
    assert rows["road X"]["origin"] == "inherited"
    eng.post(f"/transfer-rules/{rule['id']}/revisions", {
        "spec": {"freq_hz": [20.0, 200.0, 2000.0], "gain": [1.0, 3.0, 1.0]}, "basis": "test",
        "note": "measured"})
    rows = {r["name"]: r for r in viewer.get(f"/products/{unit['id']}/environments").json()}
    assert rows["road X shelf"]["stale"] is True
    fl = viewer.post(f"/environments/{rows['road X shelf']['id']}/force-limit", {
        "mass_kg": 8.0, "c2": 2.0, "f0_hz": 150.0,
        "modes": [{"fn_hz": 150.0, "mass_kg": 5.0, "q": 10.0}]}, expect=200).json()
    assert fl["force_rms_n"] > 0 and fl["notches"]


def test_transfer_refusals_are_problems(eng, viewer, pod):
    unit = pod["unit"]
    r = eng.put(f"/products/{unit['id']}/mounting", {"axes": {"X": "X", "Y": "Y", "Z": "-Z"}},
                expect=422)
    assert r.headers["content-type"].startswith("application/problem+json")
    assert "determinant" in r.text
    viewer.put(f"/products/{unit['id']}/mounting", {"axes": {"X": "Y", "Y": "Z", "Z": "X"}},
               expect=403)
    eng.post("/transferred-environments", {
        "product_id": unit["id"], "name": "bad", "axis": "X",
        "parent_environment_ids": [pod["envs"]["Y"]["id"]]}, expect=422)  # Y does not reach X
