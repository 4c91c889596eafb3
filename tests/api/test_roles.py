"""Role matrix: every route with every role, with no token and with a revoked token.

viewer < engineer < approver < admin: viewers read, engineers write, approvers waive,
admins manage users. Nothing but /health answers without a valid token.
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

import pytest

from tests.api.conftest import API, GEVS_ACC, Api, share, unique
from tests.dbutil import backend

RANK = {"viewer": 0, "engineer": 1, "approver": 2, "admin": 3}
WHO = ("none", "revoked", "viewer", "engineer", "approver", "admin")
_counter = itertools.count(1)


def _fresh_psd() -> dict:
    """Random-vibration data that differ from every earlier revision."""
    k = next(_counter)
    return {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01 + 1e-5 * k, 0.01]}


@pytest.fixture(scope="module")
def base(client, callers, db_url) -> dict:
    """Rows every case may point at, made once by an engineer."""
    eng = Api(client, callers["engineer"])
    program = eng.post("/programs", {"name": unique("roles")}).json()
    share(eng, program["id"])
    pid = program["id"]
    unit = eng.post("/products", {"program_id": pid, "name": "unit"}).json()
    phase = eng.post("/phases", {"program_id": pid, "name": "launch",
                                 "duration_s": 120.0}).json()
    env = eng.post("/environments", {"product_id": unit["id"], "phase_id": phase["id"],
                                     "name": "launch random", "kind": "random", "axis": "Z",
                                     "data": GEVS_ACC}).json()
    rev = eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]
    policy = next(p for p in eng.get("/policies").json()["items"]
                  if p["name"] == "spaceflight-gevs")
    recipe = {"product_id": unit["id"], "name": "random Z", "kind": "random", "axis": "Z",
              "revision_ids": [rev["id"]], "policy_id": policy["id"]}
    test_level = eng.post("/levels", recipe).json()
    analysis_level = eng.post("/levels", {**recipe, "name": "loads Z",
                                          "purpose": "analysis"}).json()
    req = eng.post("/requirements", {"program_id": pid, "key": "ENV-1", "text": "random Z",
                                     "product_id": unit["id"], "level_id": test_level["id"],
                                     "method": "test"}).json()
    verified = eng.post("/requirements", {"program_id": pid, "key": "INS-1", "text": "look",
                                          "product_id": unit["id"],
                                          "method": "inspection"}).json()
    eng.post(f"/requirements/{verified['id']}/evidence/inspection",
             {"passed": True, "note": "fits"})
    return {"program": program, "unit": unit, "phase": phase, "env": env, "policy": policy,
            "test_level": test_level, "analysis_level": analysis_level, "req": req,
            "verified": verified, "db_url": db_url, "eng": eng,
            "approver": Api(client, callers["approver"]),
            "admin": Api(client, callers["admin"])}


@dataclass(frozen=True)
class Case:
    method: str
    path: str  # the OpenAPI path, for the coverage check
    role: str | None  # least role allowed; None = open
    setup: Callable[[dict], tuple[str, dict]]  # -> (concrete path, request kwargs)
    ok: int = 200
    pending: str = ""  # allowed roles fail for this known reason (xfail)
    strict: bool = True


def _new_program(b):
    p = b["eng"].post("/programs", {"name": unique("edit")}).json()
    share(b["eng"], p["id"])
    return f"/programs/{p['id']}", {"json": {"description": "x"}, "headers": {"If-Match": '"1"'}}


def _new_policy(b):
    p = b["eng"].post(f"/policies/{b['policy']['id']}/copy", {"name": unique("pol")}).json()
    return f"/policies/{p['id']}/rules", {"json": {"rules": p["rules"]},
                                          "headers": {"If-Match": '"1"'}}


def _new_requirement(b, **kw):
    return b["eng"].post("/requirements", {
        "program_id": b["program"]["id"], "key": unique("REQ"), "text": "t",
        "product_id": b["unit"]["id"], "method": "inspection", **kw}).json()


def _patch_requirement(b):
    r = _new_requirement(b)
    return f"/requirements/{r['id']}", {"json": {"text": "edited"},
                                        "headers": {"If-Match": '"1"'}}


def _with_evidence(b):
    """A new requirement with evidence recorded by the base engineer (an approver other
    than its author may waive it under the two-person rule)."""
    r = _new_requirement(b)
    b["eng"].post(f"/requirements/{r['id']}/evidence/inspection",
                  {"passed": False, "note": "scratched"})
    return r


def _new_waiver(b):
    r = _with_evidence(b)
    w = b["approver"].post(f"/requirements/{r['id']}/waivers", {
        "rationale": "accepted by the board",
        "expires_at": (datetime.now(UTC) + timedelta(days=1)).isoformat()}).json()
    return f"/waivers/{w['id']}/revoke", {}


def _new_token(b):
    name = unique("tok")
    b["admin"].post("/users", {"name": name, "role": "viewer"})
    t = b["admin"].post(f"/users/{name}/tokens", {"label": "x"}).json()
    return f"/tokens/{t['prefix']}/revoke", {}


def _other_user(b):
    name = unique("other")
    b["admin"].post("/users", {"name": name, "role": "viewer"})
    return f"/users/{name}/tokens", {"json": {"label": "for someone else"}}


def _csv() -> bytes:
    k = next(_counter)
    return f"freq_hz,asd\n20,{0.01 + 1e-5 * k}\n2000,0.01\n".encode()


P = lambda b: b["program"]["id"]  # noqa: E731
U = lambda b: b["unit"]["id"]  # noqa: E731
E = lambda b: b["env"]["id"]  # noqa: E731
R = lambda b: b["req"]["id"]  # noqa: E731

CASES = {
    "health": Case("GET", "/health", None, lambda b: ("/health", {})),
    "programs list": Case("GET", "/programs", "viewer", lambda b: ("/programs", {})),
    "program create": Case("POST", "/programs", "engineer",
                           lambda b: ("/programs", {"json": {"name": unique("p")}}), 201),
    "program get": Case("GET", "/programs/{program_id}", "viewer",
                        lambda b: (f"/programs/{P(b)}", {})),
    "program edit": Case("PATCH", "/programs/{program_id}", "engineer", _new_program),
    "product create": Case("POST", "/products", "engineer", lambda b: (
        "/products", {"json": {"program_id": P(b), "name": unique("u")}}), 201),
    "product get": Case("GET", "/products/{product_id}", "viewer",
                        lambda b: (f"/products/{U(b)}", {})),
    "products list": Case("GET", "/programs/{program_id}/products", "viewer",
                          lambda b: (f"/programs/{P(b)}/products", {})),
    "product tree": Case("GET", "/programs/{program_id}/products/tree", "viewer",
                         lambda b: (f"/programs/{P(b)}/products/tree", {})),
    "phase create": Case("POST", "/phases", "engineer", lambda b: (
        "/phases", {"json": {"program_id": P(b), "name": unique("ph"), "duration_s": 1.0}}),
        201),
    "phases list": Case("GET", "/programs/{program_id}/phases", "viewer",
                        lambda b: (f"/programs/{P(b)}/phases", {})),
    "environment create": Case("POST", "/environments", "engineer", lambda b: (
        "/environments", {"json": {"product_id": U(b), "name": unique("e"), "kind": "random",
                                   "axis": "X", "data": GEVS_ACC}}), 201),
    "environments list": Case("GET", "/environments", "viewer",
                              lambda b: ("/environments", {"params": {"product_id": U(b)}})),
    "environment get": Case("GET", "/environments/{environment_id}", "viewer",
                            lambda b: (f"/environments/{E(b)}", {})),
    "revisions list": Case("GET", "/environments/{environment_id}/revisions", "viewer",
                           lambda b: (f"/environments/{E(b)}/revisions", {})),
    "environment impact": Case("GET", "/environments/{environment_id}/impact", "viewer",
                               lambda b: (f"/environments/{E(b)}/impact", {})),
    "revision add": Case("POST", "/environments/{environment_id}/revisions", "engineer",
                         lambda b: (f"/environments/{E(b)}/revisions",
                                    {"json": {"data": _fresh_psd()}}), 201),
    "compare": Case("GET", "/environments/{environment_id}/compare", "viewer",
                    lambda b: (f"/environments/{E(b)}/compare", {"params": {"a": 1, "b": 1}})),
    "environment upload": Case("POST", "/environments/upload", "engineer", lambda b: (
        "/environments/upload", {
            "files": {"file": ("psd.csv", _csv(), "text/csv")},
            "data": {"product_id": str(U(b)), "name": unique("up"), "kind": "random",
                     "axis": "Y", "value_units": "g^2/Hz"}}), 201),
    "revision upload": Case("POST", "/environments/{environment_id}/revisions/upload",
                            "engineer", lambda b: (
        f"/environments/{E(b)}/revisions/upload", {
            "files": {"file": ("psd.csv", _csv(), "text/csv")},
            "data": {"value_units": "g^2/Hz", "note": "upload"}}), 201),
    "policies list": Case("GET", "/policies", "viewer", lambda b: ("/policies", {})),
    "policy get": Case("GET", "/policies/{policy_id}", "viewer",
                       lambda b: (f"/policies/{b['policy']['id']}", {})),
    "policy copy": Case("POST", "/policies/{policy_id}/copy", "engineer", lambda b: (
        f"/policies/{b['policy']['id']}/copy", {"json": {"name": unique("c")}}), 201),
    "policy rules": Case("PUT", "/policies/{policy_id}/rules", "engineer", _new_policy),
    "level derive": Case("POST", "/levels", "engineer", lambda b: ("/levels", {"json": {
        **b["analysis_level"]["recipe"], "name": unique("lvl")}}), 201),
    "levels list": Case("GET", "/levels", "viewer",
                        lambda b: ("/levels", {"params": {"product_id": U(b)}})),
    "level get": Case("GET", "/levels/{level_id}", "viewer",
                      lambda b: (f"/levels/{b['test_level']['id']}", {})),
    "requirements list": Case("GET", "/requirements", "viewer", lambda b: ("/requirements", {})),
    "traceability": Case("GET", "/programs/{program_id}/traceability", "viewer",
                         lambda b: (f"/programs/{P(b)}/traceability", {})),
    "requirement create": Case("POST", "/requirements", "engineer", lambda b: (
        "/requirements", {"json": {"program_id": P(b), "key": unique("K"), "text": "t",
                                   "product_id": U(b), "method": "analysis"}}), 201),
    "requirement get": Case("GET", "/requirements/{requirement_id}", "viewer",
                            lambda b: (f"/requirements/{R(b)}", {})),
    "requirement edit": Case("PATCH", "/requirements/{requirement_id}", "engineer",
                             _patch_requirement),
    "requirement status": Case("GET", "/requirements/{requirement_id}/status", "viewer",
                               lambda b: (f"/requirements/{R(b)}/status", {})),
    "waive": Case("POST", "/requirements/{requirement_id}/waivers", "approver", lambda b: (
        f"/requirements/{_with_evidence(b)['id']}/waivers", {"json": {
            "rationale": "accepted by the board",
            "expires_at": (datetime.now(UTC) + timedelta(days=1)).isoformat()}}), 201),
    "waive without evidence": Case(
        "POST", "/requirements/{requirement_id}/waivers", "admin", lambda b: (
            f"/requirements/{_new_requirement(b)['id']}/waivers", {"json": {
                "rationale": "deferred to the system test",
                "expires_at": (datetime.now(UTC) + timedelta(days=1)).isoformat()}}), 201),
    "waiver request": Case("POST", "/requirements/{requirement_id}/waiver-requests",
                           "engineer", lambda b: (
        f"/requirements/{R(b)}/waiver-requests", {"json": {"reason": "cosmetic damage only"}}),
        201),
    "waiver requests": Case("GET", "/requirements/{requirement_id}/waiver-requests", "viewer",
                            lambda b: (f"/requirements/{R(b)}/waiver-requests", {})),
    "waiver revoke": Case("POST", "/waivers/{waiver_id}/revoke", "approver", _new_waiver),
    "evidence list": Case("GET", "/requirements/{requirement_id}/evidence", "viewer",
                          lambda b: (f"/requirements/{R(b)}/evidence", {})),
    "evidence analysis": Case("POST", "/requirements/{requirement_id}/evidence/analysis",
                              "engineer", lambda b: (
        f"/requirements/{R(b)}/evidence/analysis",
        {"json": {"applied": 1.0, "allowable": 2.0, "units": "MPa"}}), 201),
    "evidence test": Case("POST", "/requirements/{requirement_id}/evidence/test", "engineer",
                          lambda b: (f"/requirements/{R(b)}/evidence/test", {"json": {
                              "freq_hz": b["test_level"]["result"]["freq_hz"],
                              "values": b["test_level"]["result"]["asd_g2_hz"],
                              "duration_s": 120.0}}), 201),
    "evidence test upload": Case(
        "POST", "/requirements/{requirement_id}/evidence/test/upload", "engineer", lambda b: (
            f"/requirements/{R(b)}/evidence/test/upload", {
                "files": {"file": ("rec.csv", "\n".join(
                    f"{f},{a}" for f, a in zip(b["test_level"]["result"]["freq_hz"],
                                               b["test_level"]["result"]["asd_g2_hz"],
                                               strict=True)).encode(), "text/csv")},
                "data": {"value_units": "g^2/Hz", "duration_s": "120"}}), 201),
    "evidence similarity": Case("POST", "/requirements/{requirement_id}/evidence/similarity",
                                "engineer", lambda b: (
        f"/requirements/{_new_requirement(b, method='similarity')['id']}/evidence/similarity",
        {"json": {"similar_requirement_id": b["verified"]["id"],
                  "rationale": "same unit, same mounting"}}), 201),
    "evidence inspection": Case("POST", "/requirements/{requirement_id}/evidence/inspection",
                                "engineer", lambda b: (
        f"/requirements/{R(b)}/evidence/inspection",
        {"json": {"passed": True, "note": "fits"}}), 201),
    "audit": Case("GET", "/audit", "viewer",
                  lambda b: ("/audit", {"params": {"program_id": P(b)}})),
    "user create": Case("POST", "/users", "admin", lambda b: (
        "/users", {"json": {"name": unique("u"), "role": "viewer"}}), 201),
    "users list": Case("GET", "/users", "admin", lambda b: ("/users", {})),
    "token create": Case("POST", "/users/{user_name}/tokens", "admin", _other_user, 201),
    "token revoke": Case("POST", "/tokens/{prefix}/revoke", "admin", _new_token),
    "events list": Case("GET", "/events", "viewer", lambda b: ("/events", {})),
    "metrics": Case("GET", "/metrics", "viewer", lambda b: ("/metrics", {})),
    "specification pdf": Case("GET", "/documents/specification.pdf", "viewer", lambda b: (
        "/documents/specification.pdf",
        {"params": {"product_id": U(b), "grade": b["test_level"]["grade"]}})),
    "audit pdf": Case("GET", "/documents/audit.pdf", "viewer", lambda b: (
        "/documents/audit.pdf", {"params": {"program_id": P(b)}})),
    "documents list": Case("GET", "/documents", "viewer", lambda b: ("/documents", {})),
    "baseline": Case("GET", "/documents/baseline", "viewer", lambda b: (
        "/documents/baseline", {"params": {"product_id": U(b)}})),
    "specification issue": Case("POST", "/documents/specification", "engineer",
                                lambda b: _issue_kw(b), 201),
    "sign": Case("POST", "/documents/{document_id}/signoffs", "engineer", lambda b: (
        f"/documents/{_issued(b)}/signoffs", {"json": {"role": "prepared"}}), 201),
    "signoffs": Case("GET", "/documents/{document_id}/signoffs", "viewer", lambda b: (
        f"/documents/{_issued(b, once=True)}/signoffs", {})),
    "environment withdraw": Case("POST", "/environments/{environment_id}/withdrawal",
                                 "engineer", lambda b: (
        f"/environments/{_own_env(b)['id']}/withdrawal",
        {"json": {"reason": "measured on the wrong fixture"}}), 201),
    "level withdraw": Case("POST", "/levels/{level_id}/withdrawal", "engineer", lambda b: (
        f"/levels/{_own_level(b)['id']}/withdrawal",
        {"json": {"reason": "derived from the wrong revision"}}), 201),
    "level rederive": Case("POST", "/levels/{level_id}/rederive", "engineer",
                           lambda b: _revised_level(b)),
}


def _own_env(b):
    """An environment of the base unit of its own (other cases revise the base one)."""
    return b["eng"].post("/environments", {"product_id": U(b), "phase_id": b["phase"]["id"],
                                           "name": unique("env"), "kind": "random",
                                           "axis": "Z", "data": _fresh_psd()}).json()


def _own_level(b, env=None):
    env = env or _own_env(b)
    rev = b["eng"].get(f"/environments/{env['id']}/revisions").json()["items"][0]
    return b["eng"].post("/levels", {**b["analysis_level"]["recipe"], "name": unique("lvl"),
                                     "revision_ids": [rev["id"]]}).json()


def _revised_level(b):
    env = _own_env(b)
    level = _own_level(b, env)
    b["eng"].post(f"/environments/{env['id']}/revisions", {"data": _fresh_psd(),
                                                           "note": "new data"})
    return f"/levels/{level['id']}/rederive", {}


def _issue_kw(b):
    """Issue a specification of a unit of its own (nothing else makes its level stale)."""
    if "signed_unit" not in b:
        unit = b["eng"].post("/products", {"program_id": P(b), "name": unique("signed")}).json()
        env = b["eng"].post("/environments", {"product_id": unit["id"],
                                              "phase_id": b["phase"]["id"],
                                              "name": "launch random", "kind": "random",
                                              "axis": "Z", "data": GEVS_ACC}).json()
        rev = b["eng"].get(f"/environments/{env['id']}/revisions").json()["items"][0]
        b["eng"].post("/levels", {**b["test_level"]["recipe"], "product_id": unit["id"],
                                  "revision_ids": [rev["id"]]})
        b["signed_unit"] = unit
    return "/documents/specification", {"json": {"product_id": b["signed_unit"]["id"],
                                                 "number": unique("TLS")}}


def _issued(b, once: bool = False) -> int:
    if once and "issued_id" in b:
        return b["issued_id"]
    path, kw = _issue_kw(b)
    r = b["eng"].request("POST", path, 201, **kw)
    b["issued_id"] = int(r.headers["x-document-id"])
    return b["issued_id"]


# --- modal summaries, estimates and the loads package (routers/modal.py) ----------------
_MODES = b"fn_hz,zeta,meff_z_kg\n150,0.05,0.6\n400,0.05,0.2\n"


def _upload_kw() -> dict:
    return {"files": {"file": ("modes.csv", _MODES, "text/csv")},
            "data": {"product_id": "0", "name": unique("fem")}}


def _modal(b) -> dict:
    """One modal summary revision and one estimate of the base rows, made once."""
    if "modal" not in b:
        kw = _upload_kw()
        kw["data"]["product_id"] = str(U(b))
        rev = b["eng"].request("POST", "/modal-summaries/upload", 201, **kw).json()
        est = b["eng"].post("/estimates", {"modal_revision_id": rev["id"],
                                           "level_id": b["analysis_level"]["id"]}).json()
        b["modal"] = {"revision": rev, "estimate": est}
    return b["modal"]


def _record_revision(b) -> int:
    """A stored 2-channel record of the base rows (through the record upload), made once."""
    if "record" not in b:
        import io

        import numpy as np
        buf = io.BytesIO()
        np.save(buf, np.column_stack([np.sin(np.arange(2000) * 0.3)] * 2))
        env = b["eng"].request("POST", "/environments/upload", 201, files={
            "file": ("r.npy", buf.getvalue(), "application/octet-stream")}, data={
            "product_id": str(U(b)), "kind": "time_history", "axis": "all",
            "value_units": "g", "sample_rate_hz": "1000", "channel_axes": "X,Y",
            "name": unique("rec")}).json()
        b["record"] = b["eng"].get(f"/environments/{env['id']}/revisions").json(
            )["items"][0]["id"]
    return b["record"]


def _finished_job(b) -> int:
    """A job submitted by the approver and run to its end (made once)."""
    if "job" not in b:
        import time
        job = b["approver"].request("POST", "/jobs", 202, json={
            "kind": "record_analysis", "params": {"revision_id": _record_revision(b),
                                                  "resolution_hz": 10.0}}).json()
        if backend() == "postgresql":
            # On PostgreSQL the API defers jobs to the queue: one worker runs it to the end.
            from qualplan.planning.queue import run_worker

            run_worker(b["db_url"], wait=False)
        deadline = time.monotonic() + 60
        while b["eng"].get(f"/jobs/{job['id']}").json()["status"] in ("queued", "running"):
            assert time.monotonic() < deadline
            time.sleep(0.1)
        b["job"] = job["id"]
    return b["job"]


def _document_job_file(b) -> str:
    """A file of an audit report issued as a job by the engineer, run to its end (made
    once): the concrete path of the job file route."""
    if "job_file" not in b:
        import time
        job = b["eng"].request("POST", "/documents/audit", 202, json={
            "program_id": P(b)}).json()
        if backend() == "postgresql":
            from qualplan.planning.queue import run_worker

            run_worker(b["db_url"], wait=False)
        deadline = time.monotonic() + 120
        while (job := b["eng"].get(f"/jobs/{job['id']}").json())["status"] in ("queued",
                                                                                 "running"):
            assert time.monotonic() < deadline
            time.sleep(0.1)
        assert job["status"] == "succeeded", job
        name = next(f for f in job["result"]["files"] if f.endswith(".pdf"))
        b["job_file"] = f"/jobs/{job['id']}/files/{name}"
    return b["job_file"]


def _upload(b):
    kw = _upload_kw()
    kw["data"]["product_id"] = str(U(b))
    return "/modal-summaries/upload", kw


def _estimate_evidence(b):
    # its own environment and level: other cases revise the base environment (stale level)
    env = b["eng"].post("/environments", {"product_id": U(b), "phase_id": b["phase"]["id"],
                                          "name": unique("env"), "kind": "random",
                                          "axis": "Z", "data": _fresh_psd()}).json()
    rev = b["eng"].get(f"/environments/{env['id']}/revisions").json()["items"][0]
    level = b["eng"].post("/levels", {**b["analysis_level"]["recipe"], "name": unique("lvl"),
                                      "revision_ids": [rev["id"]]}).json()
    kw = _upload_kw()
    kw["data"]["product_id"] = str(U(b))
    modal = b["eng"].request("POST", "/modal-summaries/upload", 201, **kw).json()
    est = b["eng"].post("/estimates", {"modal_revision_id": modal["id"],
                                       "level_id": level["id"]}).json()
    r = _new_requirement(b, method="analysis", level_id=level["id"])
    return f"/requirements/{r['id']}/evidence/estimate", {"json": {
        "estimate_id": est["id"], "quantity": "base_force_rms_n", "allowable": 1e6}}


CASES.update({
    "modal upload": Case("POST", "/modal-summaries/upload", "engineer", _upload, 201),
    "modal list": Case("GET", "/modal-summaries", "viewer", lambda b: ("/modal-summaries", {})),
    "modal get": Case("GET", "/modal-summaries/{summary_id}", "viewer", lambda b: (
        f"/modal-summaries/{_modal(b)['revision']['summary_id']}", {})),
    "modal revisions": Case("GET", "/modal-summaries/{summary_id}/revisions", "viewer",
                            lambda b: (f"/modal-summaries/"
                                       f"{_modal(b)['revision']['summary_id']}/revisions", {})),
    "estimate create": Case("POST", "/estimates", "engineer", lambda b: ("/estimates", {
        "json": {"modal_revision_id": _modal(b)["revision"]["id"],
                 "level_id": b["analysis_level"]["id"]}}), 201),
    "estimates list": Case("GET", "/estimates", "viewer", lambda b: ("/estimates", {})),
    "estimate get": Case("GET", "/estimates/{estimate_id}", "viewer", lambda b: (
        f"/estimates/{_modal(b)['estimate']['id']}", {})),
    "estimate evidence": Case("POST", "/requirements/{requirement_id}/evidence/estimate",
                              "engineer", _estimate_evidence, 201),
    "loads pdf": Case("GET", "/documents/loads.pdf", "viewer", lambda b: (
        "/documents/loads.pdf", {"params": {"product_id": U(b)}})),
    "job submit": Case("POST", "/jobs", "viewer", lambda b: ("/jobs", {"json": {
        "kind": "record_analysis", "params": {"revision_id": _record_revision(b)}}}), 202),
    "job get": Case("GET", "/jobs/{job_id}", "viewer", lambda b: (
        f"/jobs/{_finished_job(b)}", {})),
    # the approver's job: cancelled by its submitter or an admin; it has ended: 409
    "job file": Case("GET", "/jobs/{job_id}/files/{name}", "viewer", lambda b: (
        _document_job_file(b), {})),
    "audit issue": Case("POST", "/documents/audit", "engineer", lambda b: (
        "/documents/audit", {"json": {"program_id": P(b)}}), 202),
    "loads issue": Case("POST", "/documents/loads", "engineer", lambda b: (
        "/documents/loads", {"json": {"product_id": U(b)}}), 202),
    "job cancel": Case("POST", "/jobs/{job_id}/cancel", "approver", lambda b: (
        f"/jobs/{_finished_job(b)}/cancel", {}), 409),
})


def _expected(case: Case, who: str) -> int:
    if case.role is None:
        return case.ok
    if who in ("none", "revoked"):
        return 401
    return case.ok if RANK[who] >= RANK[case.role] else 403


def _params():
    for (name, case), who in itertools.product(CASES.items(), WHO):
        marks = []
        if case.pending and _expected(case, who) == case.ok:
            marks = [pytest.mark.xfail(strict=case.strict, reason=case.pending)]
        yield pytest.param(name, who, id=f"{name}-{who}", marks=marks)


def _child(b):
    return b["eng"].post("/products", {"program_id": P(b), "name": unique("child"),
                                       "parent_id": U(b), "mass_kg": 1.0}).json()


_ZONE = {"freq_hz": [10.0, 3000.0], "gain": [1.0, 1.0]}


def _new_rule(b):
    r = b["eng"].post("/transfer-rules", {"program_id": P(b), "name": unique("zone"),
                                          "kind": "zone_transmissibility", "spec": _ZONE,
                                          "basis": "test"}).json()
    return f"/transfer-rules/{r['id']}/revisions", {"json": {
        "spec": {**_ZONE, "gain": [1.0, 2.0]}, "basis": "analysis", "note": "revised"}}


_FORCE = {"mass_kg": 2.0, "c2": 2.0, "f0_hz": 100.0}


def _deep_notch_level(b):
    """A fresh test level whose force limit notches deeper than 3 dB (one mode, Q 20)."""
    lvl = b["eng"].post("/levels", {**b["test_level"]["recipe"], "name": unique("fl")}).json()
    b["eng"].post(f"/levels/{lvl['id']}/force-limit", {
        **_FORCE, "modes": [{"fn_hz": 100.0, "mass_kg": 1.5, "q": 20.0}], "max_notch_db": 3.0})
    return f"/levels/{lvl['id']}/force-limit/acceptance", {"json": {"rationale": "accepted"}}

CASES.update({
    "product environments": Case("GET", "/products/{product_id}/environments", "viewer",
                                 lambda b: (f"/products/{U(b)}/environments", {})),
    "mounting": Case("PUT", "/products/{product_id}/mounting", "engineer", lambda b: (
        f"/products/{_child(b)['id']}/mounting", {"json": {"axes": {"X": "Y", "Y": "-X",
                                                                    "Z": "Z"}}})),
    "transfer rules list": Case("GET", "/transfer-rules", "viewer", lambda b: (
        "/transfer-rules", {"params": {"program_id": P(b)}})),
    "transfer rule create": Case("POST", "/transfer-rules", "engineer", lambda b: (
        "/transfer-rules", {"json": {"program_id": P(b), "name": unique("zone"),
                                     "kind": "zone_transmissibility", "spec": _ZONE,
                                     "basis": "handbook"}}), 201),
    "transfer rule revise": Case("POST", "/transfer-rules/{rule_id}/revisions", "engineer",
                                 _new_rule, 201),
    "transferred environment": Case("POST", "/transferred-environments", "engineer",
                                    lambda b: ("/transferred-environments", {"json": {
                                        "product_id": _child(b)["id"], "name": unique("t"),
                                        "axis": "Z", "parent_environment_ids": [E(b)]}}), 201),
    "environment force limit": Case("POST", "/environments/{environment_id}/force-limit",
                                    "viewer", lambda b: (
        f"/environments/{E(b)}/force-limit", {"json": _FORCE})),
    "level force limit": Case("POST", "/levels/{level_id}/force-limit", "engineer", lambda b: (
        f"/levels/{b['test_level']['id']}/force-limit", {"json": _FORCE}), 201),
    "notch acceptance": Case("POST", "/levels/{level_id}/force-limit/acceptance", "approver",
                             _deep_notch_level, 201),
})

_NOTCH = {"location": "monitor A1", "limit": 0.01, "transmissibility_freq_hz": [20.0, 2000.0],
          "transmissibility_gain": [4.0, 4.0], "transmissibility_source": "analysis",
          "max_notch_db": 3.0}  # a notch deeper than 3 dB: needs an approver's acceptance


def _fresh_level(b) -> int:
    return b["eng"].post("/levels", {**b["test_level"]["recipe"], "name": unique("n")}).json(
        )["id"]


def _notched_level(b, fresh: bool) -> int:
    """A level notched against a response limit (a fresh one, or one made once)."""
    if fresh or "notched" not in b:
        lid = _fresh_level(b)
        b["eng"].post(f"/levels/{lid}/notching", _NOTCH)
        if not fresh:
            b["notched"] = lid
        return lid
    return b["notched"]


def _fresh_policy(b) -> int:
    return b["eng"].post(f"/policies/{b['policy']['id']}/copy", {"name": unique("pc")}).json(
        )["id"]


CASES.update({
    "level breakpoints": Case("GET", "/levels/{level_id}/breakpoints.csv", "viewer", lambda b: (
        f"/levels/{b['test_level']['id']}/breakpoints.csv", {})),
    "notching set": Case("POST", "/levels/{level_id}/notching", "engineer", lambda b: (
        f"/levels/{_fresh_level(b)}/notching", {"json": _NOTCH}), 201),
    "notching get": Case("GET", "/levels/{level_id}/notching", "viewer", lambda b: (
        f"/levels/{_notched_level(b, False)}/notching", {})),
    "notching acceptance": Case("POST", "/levels/{level_id}/notching/acceptance", "approver",
                                lambda b: (f"/levels/{_notched_level(b, True)}/notching/acceptance",
                                           {"json": {"rationale": "fixture resonance"}}), 201),
    # a global role: a policy belongs to no program
    "policy confirmation": Case("POST", "/policies/{policy_id}/confirmations", "approver",
                                lambda b: (f"/policies/{_fresh_policy(b)}/confirmations", {
                                    "json": {"issue": "rev A (invented)", "note": "checked"},
                                    "headers": {"If-Match": '"1"'}}), 201),
})


def _member(b, granted: bool):
    name = unique("member")
    b["admin"].post("/users", {"name": name, "role": "viewer"})
    if granted:
        b["admin"].put(f"/programs/{P(b)}/members/{name}", {"role": "viewer"})
    return name


CASES.update({
    "members list": Case("GET", "/programs/{program_id}/members", "viewer", lambda b: (
        f"/programs/{P(b)}/members", {})),
    "member grant": Case("PUT", "/programs/{program_id}/members/{user_name}", "approver",
                         lambda b: (f"/programs/{P(b)}/members/{_member(b, False)}",
                                    {"json": {"role": "engineer"}})),
    "member revoke": Case("DELETE", "/programs/{program_id}/members/{user_name}", "approver",
                          lambda b: (f"/programs/{P(b)}/members/{_member(b, True)}", {}), 204),
})

@pytest.mark.parametrize("name, who", list(_params()))
def test_role_matrix(client, callers, base, name, who):
    case = CASES[name]
    path, kw = case.setup(base)
    r = Api(client, callers[who]).request(case.method, path, **kw)
    want = _expected(case, who)
    assert r.status_code == want, (case.method, path, who, r.status_code, r.text[:800])
    if want in (401, 403):
        assert r.headers["content-type"] == "application/problem+json"
    if want == 401:
        assert r.headers["WWW-Authenticate"] == "Bearer"


def test_matrix_covers_every_route(client):
    spec = client.get(f"{API}/openapi.json").json()
    routes = {(m.upper(), p.removeprefix(API)) for p, ops in spec["paths"].items() for m in ops}
    covered = {(c.method, c.path) for c in CASES.values()}
    assert routes == covered, {"not in the matrix": routes - covered,
                               "not a route": covered - routes}


def test_nothing_readable_without_a_token(client, callers, base):
    """Every GET route of the OpenAPI document, with ids filled in, answers 401."""
    spec = client.get(f"{API}/openapi.json").json()
    fill = {"program_id": P(base), "product_id": U(base), "environment_id": E(base),
            "policy_id": base["policy"]["id"], "level_id": base["test_level"]["id"],
            "requirement_id": R(base), "summary_id": 1, "estimate_id": 1, "document_id": 1,
            "job_id": 1, "name": "report.pdf"}
    for path, ops in spec["paths"].items():
        if "get" not in ops or path.endswith(("/health", "/openapi.json", "/docs")):
            continue
        concrete = re.sub(r"\{(\w+)\}", lambda mt: str(fill[mt.group(1)]), path)
        for who in ("none", "revoked", "garbage"):
            r = client.get(concrete, params={"program_id": P(base), "product_id": U(base),
                                             "a": 1, "b": 1},
                           headers=callers[who].headers)
            assert r.status_code == 401, (path, who, r.text[:300])


@pytest.mark.parametrize("role", ["viewer", "engineer", "approver"])
def test_everyone_may_make_a_token_for_themself(client, callers, role):
    me = Api(client, callers[role])
    t = me.post(f"/users/{callers[role].name}/tokens", {"label": "laptop"}).json()
    assert t["token"].startswith("qp_") and t["prefix"] == t["token"][:10]
    r = client.get(f"{API}/programs", headers={"Authorization": f"Bearer {t['token']}"})
    assert r.status_code == 200
    me.post(f"/tokens/{t['prefix']}/revoke", expect=403)


def test_revoked_token_stops_working_at_once(client, callers):
    admin = Api(client, callers["admin"])
    name = unique("leaver")
    admin.post("/users", {"name": name, "role": "engineer"})
    t = admin.post(f"/users/{name}/tokens", {}).json()
    headers = {"Authorization": f"Bearer {t['token']}"}
    assert client.get(f"{API}/requirements", headers=headers).status_code == 200
    admin.post(f"/tokens/{t['prefix']}/revoke", expect=200)
    assert client.get(f"{API}/requirements", headers=headers).status_code == 401
    admin.post(f"/tokens/{t['prefix']}/revoke", expect=200)  # idempotent
    admin.post("/tokens/qp_nothing/revoke", expect=404)
    r = admin.post("/users", {"name": name, "role": "engineer"}, expect=409)
    assert r.json()["status"] == 409
    users = admin.get("/users", params={"limit": 500}).json()
    assert name in [u["name"] for u in users["items"]]


def test_pdf_documents_are_served_with_their_content_hash(client, callers, base, factory):
    """The API serves the specification and the audit as PDF, made from the same content
    as `qualplan report` (planning.documents), with that content's hash in a header."""
    from qualplan.planning import documents

    viewer = callers["viewer"].headers
    grade = base["test_level"]["grade"]
    r = client.get("/api/v1/documents/specification.pdf",
                   params={"product_id": base["unit"]["id"], "grade": grade}, headers=viewer)
    assert r.status_code == 200 and r.headers["content-type"] == "application/pdf"
    assert r.content.startswith(b"%PDF")
    with factory() as session:
        content = documents.specification_content(session, base["unit"]["id"], grade,
                                                  preview=True)
    assert r.headers["x-content-hash"] == content.content_hash()
    a = client.get("/api/v1/documents/audit.pdf", params={"program_id": base["program"]["id"]},
                   headers=viewer)
    assert a.status_code == 200 and a.content.startswith(b"%PDF")
    missing = client.get("/api/v1/documents/specification.pdf",
                         params={"product_id": base["unit"]["id"], "grade": "acceptance"},
                         headers=viewer)
    assert missing.status_code == 422 and missing.json()["field"] == "grade"
