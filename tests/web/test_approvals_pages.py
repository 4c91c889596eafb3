"""Withdrawal, re-derivation, waiver requests and sign-off through the web pages."""

from __future__ import annotations

import math
import tempfile
from pathlib import Path

from qualplan.planning import documents, environments, levels, policies, requirements
from qualplan.planning import schemas as s
from qualplan.reports import PdfRenderer
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.web.conftest import SETUP, unique

FLAT = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.2, 0.2]}


def _level(factory, world):
    with unit_of_work(factory) as session:
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, phase_id=world.phase_id, name=unique("flight Z"),
            kind=m.EnvironmentKind.random, axis=m.Axis.Z, data=FLAT))
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        level = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="random Z", kind="random", axis=m.Axis.Z,
            revision_ids=[env.revisions[-1].id], policy_id=gevs.id))
        return env.id, level.id


def test_rederive_preview_then_store_and_withdraw(factory, browserless, users, world):
    env_id, level_id = _level(factory, world)
    with unit_of_work(factory) as session:
        environments.revise_environment(session, SETUP, env_id, s.RevisionIn(
            data={**FLAT, "asd_g2_hz": [0.4, 0.4]}, note="doubled"))
    eng = browserless(users["engineer"])
    html = eng.get(f"/levels/{level_id}").text
    assert f"/levels/{level_id}/rederive" in html
    preview = eng.get(f"/levels/{level_id}/rederive")
    assert preview.status_code == 200
    # flat ASD x 2: +10 log10 2 = +3.01 dB at every breakpoint (closed form)
    assert f"{10 * math.log10(2):+.2f}" in preview.text and "Store #2" in preview.text
    r = eng.post(f"/levels/{level_id}/rederive", {})
    assert r.status_code == 200 and "random Z #2" in r.text
    assert "superseded by random Z #2" in eng.get(f"/levels/{level_id}").text
    r = eng.post(f"/environments/{env_id}/withdrawal", {"reason": "short"})
    assert r.status_code == 422 and "reason" in r.text
    r = eng.post(f"/environments/{env_id}/withdrawal", {"reason": "replaced by issue C data"})
    assert r.status_code == 200 and "Withdrawn." in r.text and "issue C" in r.text
    viewer = browserless(users["viewer"])
    r = viewer.post(f"/levels/{level_id}/withdrawal", {"reason": "not needed any more"})
    assert r.status_code == 403


def test_waiver_request_and_sign_off_pages(factory, browserless, users, world):
    _, level_id = _level(factory, world)
    with unit_of_work(factory) as session:
        content = documents.specification_content(session, world.product_id,
                                                  "qualification", number=unique("TLS"))
        with tempfile.TemporaryDirectory() as tmp:
            doc_id = documents.issue_document(session, SETUP, content, PdfRenderer(),
                                              Path(tmp)).document_id
        req_id = requirements.create_requirement(session, SETUP, s.RequirementCreate(
            program_id=world.program_id, key=unique("VIB"), text="Random Z",
            product_id=world.product_id, level_id=level_id,
            method=m.VerificationMethod.test)).id
    eng = browserless(users["engineer"])
    page = eng.get(f"/documents/{doc_id}").text
    assert page.count("unsigned") == 3 and f"/levels/{level_id}" in page
    assert eng.post(f"/documents/{doc_id}/signoffs", {"role": "prepared"}).status_code == 200
    r = eng.post(f"/documents/{doc_id}/signoffs", {"role": "checked"})
    assert r.status_code == 409 and "three distinct users" in r.text
    appr = browserless(users["approver"])
    r = appr.post(f"/documents/{doc_id}/signoffs", {"role": "approved"})
    assert r.status_code == 409 and "approved after it is checked" in r.text
    r = eng.post(f"/requirements/{req_id}/waiver-requests", {"reason": "cosmetic only, "
                                                            "see report 12"})
    assert r.status_code == 200 and "Waiver requests" in r.text and "see report 12" in r.text
    listing = eng.get("/documents").text
    assert content.number in listing and f"prepared: {users['engineer'].name}" in listing
