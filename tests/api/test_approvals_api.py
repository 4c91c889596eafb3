"""Withdrawal, re-derivation, baselines, previews, two-person waivers and sign-off over
HTTP (the rules themselves are tested in tests/planning/test_approvals.py)."""

from __future__ import annotations

import io
import math
import re
from datetime import UTC, datetime, timedelta

import pytest
from pypdf import PdfReader

from qualplan.store.models import Role
from tests.api.conftest import Api, make_token, unique

FLAT = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.2, 0.2]}


@pytest.fixture
def unit(eng):
    program = eng.post("/programs", {"name": unique("ridge")}).json()
    unit = eng.post("/products", {"program_id": program["id"], "name": "camera"}).json()
    phase = eng.post("/phases", {"program_id": program["id"], "name": "flight",
                                 "duration_s": 1800.0}).json()
    env = eng.post("/environments", {"product_id": unit["id"], "phase_id": phase["id"],
                                     "name": "flight Z", "kind": "random", "axis": "Z",
                                     "data": FLAT}).json()
    rev = eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]
    policy = next(p for p in eng.get("/policies").json()["items"]
                  if p["name"] == "spaceflight-gevs")
    level = eng.post("/levels", {"product_id": unit["id"], "name": "random Z",
                                 "kind": "random", "axis": "Z", "revision_ids": [rev["id"]],
                                 "policy_id": policy["id"]}).json()
    return {"program": program, "unit": unit, "env": env, "level": level}


def test_rederive_then_withdraw_over_http(eng, viewer, unit):
    env, level = unit["env"], unit["level"]
    eng.post(f"/environments/{env['id']}/revisions", {
        "data": {**FLAT, "asd_g2_hz": [0.4, 0.4]}, "note": "doubled"})
    d = eng.post(f"/levels/{level['id']}/rederive", expect=200).json()
    # flat ASD x 2: every breakpoint and the g rms +10 log10 2 dB (closed form)
    assert {round(r["db"], 9) for r in d["rows"]} == {round(10 * math.log10(2), 9)}
    assert d["overall_db"] == pytest.approx(10 * math.log10(2), abs=1e-9)
    assert not d["stored"]
    assert len(viewer.get("/levels", params={"product_id": unit["unit"]["id"]}).json()[
        "items"]) == 1
    stored = eng.post(f"/levels/{level['id']}/rederive", params={"store": "true"},
                      expect=200).json()
    assert stored["stored"] and stored["new_level_id"]
    old = viewer.get(f"/levels/{level['id']}").json()
    assert old["superseded_by_id"] == stored["new_level_id"] and old["stale"]
    r = eng.post(f"/environments/{env['id']}/withdrawal", {"reason": "short"}, expect=422)
    assert r.json()["field"] == "reason"
    eng.post(f"/environments/{env['id']}/withdrawal", {"reason": "replaced by issue C data"})
    read = viewer.get(f"/environments/{env['id']}").json()
    assert "replaced by issue C data" in read["withdrawn"]
    new = viewer.get(f"/levels/{stored['new_level_id']}").json()
    assert new["stale"] and any("withdrawn" in x for x in new["stale_reasons"])
    base = viewer.get("/documents/baseline", params={"product_id": unit["unit"]["id"]}).json()
    assert [(x["level_id"], x["taken"]) for x in base] == [(stored["new_level_id"], False)]
    r = eng.post("/documents/specification", {"product_id": unit["unit"]["id"],
                                              "level_ids": [stored["new_level_id"]]},
                 expect=422)
    assert r.json()["field"] == "level_ids"


def test_preview_pdf_is_marked_on_every_page(viewer, unit):
    r = viewer.get("/documents/specification.pdf", params={"product_id": unit["unit"]["id"]})
    assert r.status_code == 200 and "preview" in r.headers["content-disposition"]
    pages = [p.extract_text() for p in PdfReader(io.BytesIO(r.content)).pages]
    assert all("PREVIEW - not issued" in t for t in pages)
    assert not any(re.search(r"revision\s+\d", t) for t in pages)


def test_two_person_waiver_and_sign_off_over_http(client, factory, eng, approver, unit):
    req = eng.post("/requirements", {
        "program_id": unit["program"]["id"], "key": "INS-7", "text": "Connector savers",
        "product_id": unit["unit"]["id"], "method": "inspection"}).json()
    approver.post(f"/requirements/{req['id']}/evidence/inspection",
                  {"passed": False, "note": "savers missing"})
    body = {"rationale": "accepted by the customer board",
            "expires_at": (datetime.now(UTC) + timedelta(days=10)).isoformat()}
    r = approver.post(f"/requirements/{req['id']}/waivers", body, expect=403)
    assert "recorded evidence" in r.json()["detail"]
    other = Api(client, type(approver.caller)(*make_token(factory, Role.approver)))
    r = other.post(f"/requirements/{req['id']}/waivers",
                   {**body, "expires_at": (datetime.now(UTC) + timedelta(days=400)).isoformat()},
                   expect=422)
    assert r.json()["field"] == "expires_at"
    assert other.post(f"/requirements/{req['id']}/waivers", body).json()["approver"] == \
        other.caller.name

    issued = eng.request("POST", "/documents/specification", 201,
                         json={"product_id": unit["unit"]["id"], "number": unique("TLS")})
    doc_id = int(issued.headers["x-document-id"])
    assert issued.headers["x-document-revision"] == "1"
    text = PdfReader(io.BytesIO(issued.content)).pages[0].extract_text()
    assert len(re.findall(r"unsigned", text)) == 3
    eng.post(f"/documents/{doc_id}/signoffs", {"role": "prepared"})
    r = eng.post(f"/documents/{doc_id}/signoffs", {"role": "checked"}, expect=409)
    assert "three distinct users" in r.json()["detail"]
    approver.post(f"/documents/{doc_id}/signoffs", {"role": "approved"}, expect=409)
    other.post(f"/documents/{doc_id}/signoffs", {"role": "checked"})
    approver.post(f"/documents/{doc_id}/signoffs", {"role": "approved"})
    rows = eng.get(f"/documents/{doc_id}/signoffs").json()
    assert [(x["role"], x["name"]) for x in rows] == [
        ("prepared", eng.caller.name), ("checked", other.caller.name),
        ("approved", approver.caller.name)]
    docs = eng.get("/documents", params={"product_id": unit["unit"]["id"]}).json()
    assert docs[0]["level_ids"] == [unit["level"]["id"]]
