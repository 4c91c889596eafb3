"""Margins by cause and coverage-aware status through the API, and the change impact of
an environment (issue 13 items 1, 2 and 7)."""

from __future__ import annotations

import numpy as np

from qualplan.dynamics import psd
from tests.api.conftest import share, unique

# Invented environments (road spectrum from 10 Hz; the coverage band starts at 20 Hz).
ROAD_Z = {"freq_hz": [10.0, 40.0, 500.0], "asd_g2_hz": [0.015, 0.015, 0.00015]}
DESIGN_Y = {"freq_hz": [20.0, 100.0, 1000.0], "asd_g2_hz": [0.01, 0.04, 0.004]}


def _setup(eng):
    program = eng.post("/programs", {"name": unique("margins")}).json()
    share(eng, program["id"])  # the viewer reads the audit and the impact as a member
    unit = eng.post("/products", {"program_id": program["id"], "name": "unit"}).json()
    road = eng.post("/phases", {"program_id": program["id"], "name": "road",
                                "duration_s": 3600.0, "occurrences": 2}).json()
    policy = next(p for p in eng.get("/policies").json()["items"]
                  if p["name"] == "spaceflight-gevs")

    def env(name, axis, data):
        return eng.post("/environments", {
            "product_id": unit["id"], "phase_id": road["id"], "name": name, "kind": "random",
            "axis": axis, "data": data}).json()

    return program, unit, policy, env("road Z", "Z", ROAD_Z), env("design Y", "Y", DESIGN_Y)


def _rev(api, env) -> int:
    return api.get(f"/environments/{env['id']}/revisions").json()["items"][-1]["id"]


def _record(eng, req, level):
    r = level["result"]
    f = r["freq_hz"]
    lines = np.geomspace(f[0], f[-1], int(48 * np.log2(f[-1] / f[0])) + 1)
    return eng.post(f"/requirements/{req['id']}/evidence/test", {
        "freq_hz": lines.tolist(), "values": psd.asd_at(f, r["asd_g2_hz"], lines).tolist(),
        "duration_s": r["duration_s"]}).json()


def test_audit_items_carry_margins_and_coverage_decides(eng, viewer):
    program, unit, policy, road, _ = _setup(eng)
    level = eng.post("/levels", {"product_id": unit["id"], "name": "random Z", "kind": "random",
                                 "axis": "Z", "revision_ids": [_rev(eng, road)],
                                 "policy_id": policy["id"]}).json()
    req = eng.post("/requirements", {"program_id": program["id"], "key": "VIB-Z",
                                     "text": "random Z", "product_id": unit["id"],
                                     "level_id": level["id"], "method": "test"}).json()
    assert _record(eng, req, level)["verdict"] == "pass"
    report = viewer.get("/audit", params={"program_id": program["id"]}).json()
    (item,) = report["items"]
    assert item["status"] == "open" and not report["release_ready"]
    assert item["reason"].startswith("level does not cover the life: FDS -")
    mg = item["margins"]
    assert mg["tolerance"] == "pass" and mg["covers_life"] is False
    assert mg["coverage_required"] is True
    assert {f["b"] for f in mg["fatigue"]} == {"4", "6.4", "8", "12"}
    assert mg["compression_db"] is None  # GEVS: fixed 120 s, no compression
    # the compared figure is the record over the limit, not a sum with anything else
    assert item["achieved_margin"] == mg["achieved_over_limit_db"]
    st = viewer.get(f"/requirements/{req['id']}/status").json()
    assert st["status"] == "open"


def test_environment_impact(eng, viewer):
    program, unit, policy, road, design = _setup(eng)
    loads = eng.post("/levels", {"product_id": unit["id"], "name": "loads Y", "kind": "random",
                                 "axis": "Y", "purpose": "analysis",
                                 "revision_ids": [_rev(eng, design)],
                                 "policy_id": policy["id"]}).json()
    eng.post("/requirements", {"program_id": program["id"], "key": "STR-Y", "text": "bracket",
                               "product_id": unit["id"], "level_id": loads["id"],
                               "method": "analysis"})
    got = viewer.get(f"/environments/{design['id']}/impact").json()
    assert [x["level"] for x in got["levels"]] == ["loads Y #1"]
    assert [x["key"] for x in got["requirements"]] == ["STR-Y"]
    assert got["levels"][0]["stale_already"] is False
    none = viewer.get(f"/environments/{road['id']}/impact").json()
    assert none["levels"] == [] and none["requirements"] == []
    r = viewer.get("/environments/999999/impact", expect=404)
    assert r.headers["content-type"].startswith("application/problem+json")
