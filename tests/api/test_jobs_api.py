"""Jobs through the API: 202 with the job's location, its status, cancel (SQLite: a thread
of the serving process; PostgreSQL: procrastinate, run here by a burst worker)."""

from __future__ import annotations

import math
import time

import numpy as np
import pytest

from tests.api.conftest import API, unique
from tests.api.test_record_uploads import _npy
from tests.dbutil import backend


def _record(eng, world):
    fs, n = 4000.0, 8000
    t = np.arange(n) / fs
    x = np.column_stack([np.sin(2 * np.pi * 500.0 * t), 2 * np.sin(2 * np.pi * 200.0 * t)])
    env = eng.post("/environments/upload",
                   files={"file": ("r.npy", _npy(x), "application/octet-stream")},
                   data={"product_id": str(world["unit"]["id"]), "kind": "time_history",
                         "axis": "all", "value_units": "g", "sample_rate_hz": str(fs),
                         "channel_axes": "X,Y", "name": unique("rec")}).json()
    return eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]["id"]


def _run_queue(db_url):
    if backend() == "postgresql":
        from qualplan.planning.queue import run_worker

        run_worker(db_url, wait=False)


def test_a_job_is_submitted_followed_and_done(eng, viewer, world, db_url):
    rid = _record(eng, world)
    r = eng.post("/jobs", {"kind": "record_analysis",
                           "params": {"revision_id": rid, "resolution_hz": 20.0}}, expect=202)
    job = r.json()
    assert r.headers["Location"] == f"{API}/jobs/{job['id']}"
    assert job["status"] == "queued" and job["kind"] == "record_analysis"
    _run_queue(db_url)
    deadline = time.monotonic() + 60
    while (job := viewer.get(f"/jobs/{job['id']}").json())["status"] in ("queued", "running"):
        assert time.monotonic() < deadline, job
        time.sleep(0.1)
    assert job["status"] == "succeeded", job
    # Parseval: the Welch PSD's area is the mean square; a sine of peak A has A^2 / 2
    # (closed form; Hann segments over whole periods)
    grms = [c["welch"]["grms"]["value"] for c in job["result"]["channels"]]
    assert grms == pytest.approx([1 / math.sqrt(2), 2 / math.sqrt(2)], rel=1e-9)


def test_bad_jobs_and_cancel(eng, viewer, world):
    p = eng.post("/jobs", {"kind": "nonsense"}, expect=422).json()
    assert p["field"] == "kind"
    p = eng.post("/jobs", {"kind": "record_analysis", "params": {"revision_id": 10 ** 8}},
                 expect=404).json()
    assert p["status"] == 404
    viewer.post("/jobs/999999999/cancel", expect=404)
    assert viewer.get("/health", expect=200).json()["jobs"]["ready"] is True


def _follow(api, job, db_url):
    _run_queue(db_url)
    deadline = time.monotonic() + 120
    while (job := api.get(f"/jobs/{job['id']}").json())["status"] in ("queued", "running"):
        assert time.monotonic() < deadline, job
        time.sleep(0.1)
    return job


def test_a_derivation_and_its_documents_as_jobs(eng, viewer, world, db_url):
    from tests.api.test_story import _revision_id

    body = {"product_id": world["unit"]["id"], "name": unique("random Z"), "kind": "random",
            "axis": "Z", "revision_ids": [_revision_id(eng, world["env"])],
            "policy_id": world["policy"]["id"]}
    r = eng.post("/levels", body, expect=202, params={"job": "true"})
    job = r.json()
    assert r.headers["Location"] == f"{API}/jobs/{job['id']}"
    assert (job["kind"], job["status"]) == ("level_derive", "queued")
    job = _follow(viewer, job, db_url)
    assert job["status"] == "succeeded", job
    level = viewer.get(job["result"]["links"]["level"].removeprefix(API)).json()
    assert level["id"] == job["result"]["level_id"] and level["number"] == 1
    # GSFC-STD-7000 (GEVS) Table 2.4-3: the component acceptance profile is 10.0 g rms
    # (printed to 3 figures); the limit level is that one input
    assert level["result"]["limit"]["grms"] == pytest.approx(10.0, rel=5e-3)
    # the same recipe in the request (the synchronous path, unchanged): the same result
    direct = eng.post("/levels", body).json()
    assert direct["number"] == 2 and direct["result"] == level["result"]

    # the specification issued as a job: the result gives the document and its files
    r = eng.post("/documents/specification", {"product_id": world["unit"]["id"],
                                              "level_ids": [level["id"]]},
                 expect=202, params={"job": "true"})
    job = _follow(viewer, r.json(), db_url)
    assert job["status"] == "succeeded", job
    res = job["result"]
    docs = viewer.get("/documents", params={"product_id": world["unit"]["id"]}).json()
    assert [(d["id"], d["revision"], d["level_ids"]) for d in docs] == [
        (res["document_id"], 1, [level["id"]])]
    pdf = next(u for u in res["links"]["files"] if u.endswith(".pdf"))
    got = viewer.get(pdf.removeprefix(API))
    assert got.headers["content-type"] == "application/pdf" and got.content[:5] == b"%PDF-"
    assert docs[0]["content_hash"] == res["content_hash"]
    viewer.get(f"/jobs/{job['id']}/files/nonsense.pdf", expect=404)

    # the audit report, always a job
    r = eng.post("/documents/audit", {"program_id": world["program"]["id"]}, expect=202)
    job = _follow(viewer, r.json(), db_url)
    assert job["status"] == "succeeded", job
    # the gate the report prints is the audit route's (GET /audit, the same use case)
    gate = viewer.get("/audit", params={"program_id": world["program"]["id"]}).json()
    assert job["result"]["document"] == "audit"
    assert job["result"]["release_ready"] is gate["release_ready"]
    # refused at submission, before any job row: a viewer; an unknown product
    viewer.post("/levels", body, expect=403, params={"job": "true"})
    eng.post("/documents/loads", {"product_id": 10 ** 8}, expect=404)
