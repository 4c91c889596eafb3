"""Modal summaries and response estimates through the API: upload, estimate, evidence,
stale after a new revision, problem+json on bad input, roles."""

from __future__ import annotations

from tests.api.conftest import share, unique

MODES = (b"mode,fn_hz,zeta,meff_x_kg,meff_y_kg,meff_z_kg\n"
         b"1,180,0.03,0.1,0.2,1.5\n2,240,0.05,0.05,0.9,0.4\n3,610,0.05,0.6,0.1,0.2\n")
ROAD_Z = {"freq_hz": [10.0, 40.0, 500.0], "asd_g2_hz": [0.015, 0.015, 0.00015]}


def _upload(api, unit, content=MODES, name="FEM A", expect=201):
    return api.request("POST", "/modal-summaries/upload", expect,
                       data={"product_id": str(unit["id"]), "name": name},
                       files={"file": ("modes.csv", content, "text/csv")})


def test_modal_upload_estimate_evidence_and_stale(eng, viewer):
    program = eng.post("/programs", {"name": unique("modal")}).json()
    share(eng, program["id"])
    unit = eng.post("/products", {"program_id": program["id"], "name": "unit",
                                  "mass_kg": 2.4}).json()
    road = eng.post("/phases", {"program_id": program["id"], "name": "road",
                                "duration_s": 3600.0, "occurrences": 2}).json()
    env = eng.post("/environments", {"product_id": unit["id"], "phase_id": road["id"],
                                     "name": "road Z", "kind": "random", "axis": "Z",
                                     "data": ROAD_Z}).json()
    rev_id = eng.get(f"/environments/{env['id']}/revisions").json()["items"][-1]["id"]
    policy = next(p for p in eng.get("/policies").json()["items"]
                  if p["name"] == "spaceflight-gevs")
    level = eng.post("/levels", {"product_id": unit["id"], "name": "random Z analysis",
                                 "purpose": "analysis", "kind": "random", "axis": "Z",
                                 "revision_ids": [rev_id], "policy_id": policy["id"]}).json()
    _upload(viewer, unit, expect=403)
    rev = _upload(eng, unit).json()
    assert rev["number"] == 1 and len(rev["spec"]["modes"]) == 3
    listed = viewer.get("/modal-summaries", params={"product_id": unit["id"]}).json()
    assert listed["total"] == 1 and listed["items"][0]["latest_revision"] == 1
    est = eng.post("/estimates", {"modal_revision_id": rev["id"], "level_id": level["id"]}).json()
    q = est["result"]["quantities"]
    assert q["base_force_3sigma_n"]["value"] == 3 * q["base_force_rms_n"]["value"]
    assert not est["stale"]
    req = eng.post("/requirements", {"program_id": program["id"], "key": unique("STR"),
                                     "text": "feet", "product_id": unit["id"],
                                     "level_id": level["id"], "method": "analysis"}).json()
    ev = eng.post(f"/requirements/{req['id']}/evidence/estimate", {
        "estimate_id": est["id"], "quantity": "base_force_3sigma_n",
        "allowable": 4 * q["base_force_3sigma_n"]["value"], "factor_of_safety": 2.0}).json()
    # MS = 4 / 2 - 1 = 1.0 (closed form)
    assert abs(ev["achieved_margin"] - 1.0) < 1e-12
    assert eng.get(f"/requirements/{req['id']}").json()["status"] == "verified"
    _upload(eng, unit, MODES.replace(b"180", b"175"))
    est2 = viewer.get(f"/estimates/{est['id']}").json()
    assert est2["stale"] and "revision 2" in est2["stale_reasons"][0]
    assert eng.get(f"/requirements/{req['id']}").json()["status"] == "stale"
    # bad input: problem+json naming the field
    r = _upload(eng, unit, b"fn_hz,zeta,meff_z_kg\n100,0.05,-1\n", name="bad", expect=422)
    assert r.headers["content-type"].startswith("application/problem+json")
    assert "meff_z_kg" in r.text
    r = eng.post("/estimates", {"modal_revision_id": rev["id"], "level_id": level["id"],
                                "axis": "all"}, expect=422)
    assert "axis" in r.text
    r = viewer.get("/documents/loads.pdf", params={"product_id": unit["id"], "axis": "Z"})
    assert r.headers["content-type"] == "application/pdf" and r.content.startswith(b"%PDF")
    assert len(r.headers["X-Content-Hash"]) == 64
    viewer.get("/documents/loads.pdf", params={"product_id": unit["id"], "axis": "X"},
               expect=422)
