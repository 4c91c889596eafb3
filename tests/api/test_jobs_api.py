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
