"""Jobs: one job code, run in a thread (SQLite) or by procrastinate workers (PostgreSQL).

The procrastinate tests need PostgreSQL (the README's PostgreSQL run); on SQLite they
are skipped. Jobs commit for real, so they use the run's database and their own rows.
"""

from __future__ import annotations

import math
import os
import signal
import subprocess
import sys
import threading
import time
import uuid
from pathlib import Path

import numpy as np
import pytest
import scipy.signal
from sqlalchemy import func, select, text

from qualplan.io import streams
from qualplan.planning import catalog, jobs, records
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import Conflict, ValidationFailed
from qualplan.store import models as m
from qualplan.store.jobs import Job
from qualplan.store.session import make_sessionmaker, unit_of_work
from tests.dbutil import backend

ENG = Actor("job-engineer", m.Role.engineer)
FS = 2000.0
ROOT = Path(__file__).resolve().parents[2]
on_pg = pytest.mark.skipif(backend() != "postgresql",
                           reason="procrastinate workers need PostgreSQL")


@pytest.fixture(scope="module")
def factory(engine):
    return make_sessionmaker(engine)


@pytest.fixture(scope="module")
def stored(factory, tmp_path_factory):
    """A committed 3-channel record (band-limited noise, invented) and its samples [g]."""
    rng = np.random.default_rng(7)
    sos = scipy.signal.butter(4, [20.0, 400.0], btype="band", fs=FS, output="sos")
    x = scipy.signal.sosfilt(sos, rng.standard_normal((10_007, 3)), axis=0)
    p = tmp_path_factory.mktemp("jobs") / "run.npy"
    np.save(p, x)
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, ENG, s.ProgramCreate(
            name=f"jobs {uuid.uuid4().hex[:8]}"))
        unit = catalog.create_product(session, ENG, s.ProductCreate(
            program_id=prog.id, name="unit", part_number="J-1", mass_kg=1.0))
        rec = records.import_record(session, ENG, records.RecordImport(
            product_id=unit.id, name="run", channel_axes=["X", "Y", "Z"]),
            streams.open_npy_record(p, fs_hz=FS, unit="g"), chunk_samples=1000)
    return rec.revision_id, x


def _submit(factory, kind="record_analysis", runner="thread", **params):
    with unit_of_work(factory) as session:
        return jobs.submit_job(session, ENG, jobs.JobSubmit(kind=kind, params=params),
                               runner=runner).id


def _job(factory, job_id) -> jobs.JobRead:
    with factory() as session:
        return jobs.read_job(session, job_id)


def test_thread_runner_runs_a_record_analysis(factory, stored):
    rid, x = stored
    job_id = _submit(factory, revision_id=rid, resolution_hz=10.0)
    assert _job(factory, job_id).status == "queued"
    runner = jobs.ThreadRunner(factory)
    try:
        assert runner.dispatch(job_id).result(timeout=60) == "succeeded"
    finally:
        runner.close()
    job = _job(factory, job_id)
    assert (job.status, job.progress, job.attempts) == ("succeeded", 1.0, 1)
    # reference: scipy.signal.welch on the whole channel (same segments, Hann, 50 %)
    for c, ch in enumerate(job.result["channels"]):
        f, p = scipy.signal.welch(x[:, c], fs=FS, nperseg=200, noverlap=100)
        # 1e-12 of the largest line: lines 1e-11 below the peak (out of band) carry the
        # rounding of a different summation order
        np.testing.assert_allclose(ch["welch"]["asd_g2_hz"], p, rtol=1e-12,
                                   atol=1e-12 * p.max())
        assert ch["welch"]["unit"] == "g^2/Hz" and ch["rms"]["unit"] == "g rms"
    # a second run of a done job stores nothing again
    assert jobs.run_job(factory, job_id) == "skipped"
    assert _job(factory, job_id).attempts == 1


def test_bad_submissions_and_failures_are_named(factory, stored):
    rid, _ = stored
    with unit_of_work(factory) as session, pytest.raises(ValidationFailed) as e:
        jobs.submit_job(session, ENG, jobs.JobSubmit(kind="nonsense"), runner="thread")
    assert e.value.field == "kind"
    with unit_of_work(factory) as session, pytest.raises(ValidationFailed) as e:
        jobs.submit_job(session, ENG, jobs.JobSubmit(kind="record_analysis",
                                                     params={"revision_id": "one"}),
                        runner="thread")
    assert e.value.field == "params.revision_id"
    # a resolution finer than the record allows: the job fails, naming why
    job_id = _submit(factory, revision_id=rid, resolution_hz=0.01)
    assert jobs.run_job(factory, job_id) == "failed"
    job = _job(factory, job_id)
    assert job.status == "failed" and "Welch segment" in job.error["detail"]


def test_cancel_queued_and_running_jobs(factory, stored, monkeypatch):
    rid, _ = stored
    job_id = _submit(factory, revision_id=rid)
    with unit_of_work(factory) as session:
        jobs.cancel_job(session, ENG, job_id)
    assert _job(factory, job_id).status == "cancelled"
    assert jobs.run_job(factory, job_id) == "skipped"
    with unit_of_work(factory) as session, pytest.raises(Conflict):
        jobs.cancel_job(session, ENG, job_id)

    # a running job sees the request at its next progress report; its writes roll back
    # (on SQLite a job that writes holds the one write lock until it ends: the job there
    # only reads)
    started, name = threading.Event(), f"cancelled-{uuid.uuid4().hex[:8]}"
    writes = backend() == "postgresql"

    def slow(session, actor, params, progress):
        if writes:
            catalog.create_program(session, actor, s.ProgramCreate(name=name))
            session.flush()
        started.set()
        for i in range(600):
            progress(i / 600, "waiting")
            time.sleep(0.05)
        return {}

    monkeypatch.setitem(jobs.KINDS, "test_slow", jobs.JobKind(m.Role.viewer, slow,
                                                               lambda s_, p: None, "slow"))
    monkeypatch.setattr(jobs, "PROGRESS_EVERY_S", 0.0)
    job_id = _submit(factory, kind="test_slow")
    runner = jobs.ThreadRunner(factory)
    try:
        fut = runner.dispatch(job_id)
        assert started.wait(20)
        with unit_of_work(factory) as session:
            jobs.cancel_job(session, ENG, job_id)
        assert fut.result(timeout=30) == "cancelled"
    finally:
        runner.close()
    assert _job(factory, job_id).status == "cancelled"
    with factory() as session:
        assert session.scalar(select(func.count()).select_from(m.Program)
                              .where(m.Program.name == name)) == 0


def _claim_twice(factory, job_id: int, *, timeout_s: float) -> list[str]:
    """Two threads run the same job at once; the outcome each claim returned."""
    out: list[str] = []
    threads = [threading.Thread(target=lambda: out.append(jobs.run_job(factory, job_id)))
               for _ in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout_s)
    return out


def test_two_claims_of_one_job_store_it_once(factory, stored):
    rid, _ = stored
    job_id = _submit(factory, revision_id=rid, resolution_hz=20.0)
    out = _claim_twice(factory, job_id, timeout_s=60)
    # the second claim may take the job over (a retried job): only the holder stores it
    assert out.count("succeeded") == 1, out
    assert _job(factory, job_id).status == "succeeded"


# --- procrastinate on PostgreSQL -----------------------------------------------------------


def _worker(db_url, *, extra: str = "", stalled_after_s: float = 30.0, burst=True):
    code = (f"{extra}\nfrom qualplan.planning.queue import run_worker\n"
            f"run_worker({db_url!r}, wait={not burst}, stalled_after_s={stalled_after_s})")
    return subprocess.Popen([sys.executable, "-c", code], cwd=ROOT,
                            env={**os.environ, "PYTHONPATH": str(ROOT)},
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)


@on_pg
def test_two_workers_fifty_jobs_each_stored_once(db_url, factory, stored):
    from qualplan.planning.queue import QueueRunner

    rid, _ = stored
    queue = QueueRunner(db_url)
    ids = []
    for _ in range(50):
        ids.append(_submit(factory, runner="procrastinate", revision_id=rid,
                           resolution_hz=50.0))
        queue.dispatch(ids[-1])
    queue.close()
    workers = [_worker(db_url) for _ in range(2)]
    for w in workers:
        assert w.wait(240) == 0, w.stderr.read().decode()[-3000:]
    with factory() as session:
        rows = session.scalars(select(Job).where(Job.id.in_(ids))).all()
        assert [r.status for r in rows] == ["succeeded"] * 50
        assert [r.attempts for r in rows] == [1] * 50  # each run once
        qids = [r.queue_job_id for r in rows]
        done = session.execute(text(
            "SELECT count(*) FROM procrastinate_jobs WHERE id = ANY(:ids) "
            "AND status = 'succeeded'"), {"ids": qids}).scalar()
    assert done == 50


SLOW_KIND = '''
import time
from qualplan.planning import jobs
from qualplan.store import models as m
def _slow(session, actor, params, progress):
    for i in range(int(params["steps"])):
        progress(i / params["steps"], "step")
        time.sleep(0.1)
    return {"steps": params["steps"]}
jobs.KINDS["test_slow"] = jobs.JobKind(m.Role.viewer, _slow, lambda s, p: None, "slow")
'''


@on_pg
def test_a_killed_workers_job_is_retried_by_another(db_url, factory, monkeypatch):
    from qualplan.planning.queue import QueueRunner

    monkeypatch.setitem(jobs.KINDS, "test_slow", jobs.JobKind(
        m.Role.viewer, lambda *a: {}, lambda s_, p: None, "slow"))
    job_id = _submit(factory, kind="test_slow", runner="procrastinate", steps=100)
    queue = QueueRunner(db_url)
    queue.dispatch(job_id)
    queue.close()
    first = _worker(db_url, extra=SLOW_KIND, stalled_after_s=3.0, burst=False)
    try:
        deadline = time.monotonic() + 60
        while _job(factory, job_id).status != "running":
            assert time.monotonic() < deadline, "the first worker never started the job"
            time.sleep(0.2)
        first.send_signal(signal.SIGKILL)
        first.wait(10)
    finally:
        if first.poll() is None:
            first.kill()
    assert _job(factory, job_id).status == "running"  # left behind by the lost worker
    second = _worker(db_url, extra=SLOW_KIND, stalled_after_s=3.0, burst=False)
    try:
        deadline = time.monotonic() + 90
        while not _job(factory, job_id).done:
            assert time.monotonic() < deadline, "the job was not retried"
            time.sleep(0.5)
    finally:
        second.send_signal(signal.SIGTERM)
        try:
            second.wait(20)
        except subprocess.TimeoutExpired:
            second.kill()
    job = _job(factory, job_id)
    assert job.status == "succeeded" and job.attempts == 2 and job.result == {"steps": 100}


# --- derivations and documents as jobs -------------------------------------------------------


@pytest.fixture(scope="module")
def spectra(factory):
    """A committed product with two random environments on Z (invented flat PSDs) and the
    default policies."""
    from qualplan.planning import environments, policies

    with unit_of_work(factory) as session:
        policies.ensure_default_policies(session, ENG)
        prog = catalog.create_program(session, ENG, s.ProgramCreate(
            name=f"derive jobs {uuid.uuid4().hex[:8]}"))
        unit = catalog.create_product(session, ENG, s.ProductCreate(
            program_id=prog.id, name="box", part_number="DJ-1", mass_kg=2.0))
        phase = catalog.create_phase(session, ENG, s.PhaseCreate(
            program_id=prog.id, name="flight", duration_s=120.0))
        revs = []
        for j, lvl in enumerate((0.01, 0.04)):
            env = environments.create_environment(session, ENG, s.EnvironmentCreate(
                product_id=unit.id, phase_id=phase.id, name=f"flat {j}", kind="random",
                axis="Z", data={"freq_hz": [20.0, 2000.0], "asd_g2_hz": [lvl, lvl]}))
            revs.append(env.revisions[-1].id)
        policy = policies.policy_ref(session, "spaceflight-gevs").id
    return {"program_id": prog.id, "product_id": unit.id, "revision_ids": revs,
            "policy_id": policy}


def _recipe(spectra, name):
    return s.LevelRecipe(product_id=spectra["product_id"], name=name, kind="random", axis="Z",
                         revision_ids=spectra["revision_ids"], policy_id=spectra["policy_id"])


def _run_thread(factory, job_id):
    runner = jobs.ThreadRunner(factory)
    try:
        return runner.dispatch(job_id).result(timeout=120)
    finally:
        runner.close()


def test_a_derivation_job_stores_the_level_the_request_would(factory, spectra):
    from qualplan.planning import levels

    name = f"job random {uuid.uuid4().hex[:6]}"
    recipe = _recipe(spectra, name)
    with unit_of_work(factory) as session:
        job_id = jobs.submit_derivation(session, ENG, recipe, runner="thread").id
    assert _run_thread(factory, job_id) == "succeeded"
    job = _job(factory, job_id)
    res = job.result
    assert (job.status, job.attempts, job.phrase) == ("succeeded", 1, "done")
    assert res["links"] == {"level": f"/api/v1/levels/{res['level_id']}",
                            "page": f"/levels/{res['level_id']}"}
    # reference: the same recipe derived in the request (levels.derive_level, whose
    # methods tests/planning/test_level_results.py and the story tests check)
    with unit_of_work(factory) as session:
        direct = levels.derive_level(session, ENG, recipe)
        d_number, d_hash, d_result = direct.number, direct.level_hash, direct.result
    with factory() as session:
        stored = levels.level_by_id(session, res["level_id"])
        assert (stored.name, stored.number, res["number"]) == (name, 1, 1)
        assert d_number == 2  # the job's level was the first of its name
        assert stored.level_hash == d_hash == res["level_hash"]
        assert stored.result == d_result
        # the envelope of two flat PSDs is the larger one: 0.04 g^2/Hz over 20-2000 Hz,
        # g rms = sqrt(0.04 x 1980) = 8.899 g rms (closed form, flat PSD)
        lim = levels.result_of(stored).limit
        assert lim.grms == pytest.approx(math.sqrt(0.04 * 1980.0), rel=1e-9)
    # a second run of the done job stores nothing again
    assert jobs.run_job(factory, job_id) == "skipped"
    with factory() as session:
        assert session.scalar(select(func.count()).select_from(m.Level).where(
            m.Level.product_id == spectra["product_id"], m.Level.name == name)) == 2


def test_derivation_jobs_are_checked_at_submission(factory, spectra):
    viewer = Actor("job-viewer", m.Role.viewer)
    from qualplan.planning.errors import NotFound, PermissionDenied

    with unit_of_work(factory) as session, pytest.raises(PermissionDenied):
        jobs.submit_derivation(session, viewer, _recipe(spectra, "refused"), runner="thread")
    bad = _recipe(spectra, "no policy").model_copy(update={"policy_id": 10 ** 8})
    with unit_of_work(factory) as session, pytest.raises(NotFound):
        jobs.submit_derivation(session, ENG, bad, runner="thread")
    with unit_of_work(factory) as session, pytest.raises(ValidationFailed) as e:
        jobs.submit_job(session, ENG, jobs.JobSubmit(kind="level_derive", params={
            "recipe": {"product_id": spectra["product_id"]}}), runner="thread")
    assert e.value.field.startswith("params.recipe.")
    # a document job is queued only through its use case (its folder is the server's)
    with unit_of_work(factory) as session, pytest.raises(ValidationFailed) as e:
        jobs.submit_job(session, ENG, jobs.JobSubmit(kind="document_issue", params={
            "document": "audit", "program_id": 1, "out_dir": "/tmp"}), runner="thread")
    assert e.value.field == "kind" and "document_issue" not in e.value.rule


def test_a_cancelled_derivation_stores_no_level(factory, spectra, monkeypatch):
    name = f"cancelled random {uuid.uuid4().hex[:6]}"
    with unit_of_work(factory) as session:
        job_id = jobs.submit_derivation(session, ENG, _recipe(spectra, name),
                                        runner="thread").id
    real = jobs.KINDS["level_derive"]
    phrases: list[str] = []

    def run(session, actor, params, progress):
        def spy(fraction, phrase):
            phrases.append(phrase)
            if phrase.startswith("FDS and ERS coverage"):
                with unit_of_work(factory) as other:  # the user presses cancel here
                    jobs.cancel_job(other, ENG, job_id)
            progress(fraction, phrase)
        return real.run(session, actor, params, spy)

    monkeypatch.setitem(jobs.KINDS, "level_derive", jobs.JobKind(
        real.role, run, real.check, real.title))
    monkeypatch.setattr(jobs, "PROGRESS_EVERY_S", 0.0)
    assert _run_thread(factory, job_id) == "cancelled"
    assert phrases[:3] == ["reading 2 input revisions",
                           "reading the life cycle of the product and axis",
                           "combining 2 inputs (envelope, random)"]
    assert _job(factory, job_id).status == "cancelled"
    with factory() as session:
        assert session.scalar(select(func.count()).select_from(m.Level).where(
            m.Level.name == name)) == 0


def test_an_audit_report_job_issues_the_document_once(factory, spectra, tmp_path):
    from qualplan.planning import documents
    from qualplan.reports import RENDERERS

    jobs.register_renderers(RENDERERS)
    doc = jobs.DocumentJob(document="audit", program_id=spectra["program_id"],
                           out_dir=str(tmp_path / "audit"))
    with unit_of_work(factory) as session:
        job_id = jobs.submit_document(session, ENG, doc, runner="thread").id
    assert _run_thread(factory, job_id) == "succeeded"
    res = _job(factory, job_id).result
    pdf = tmp_path / "audit" / next(f for f in res["files"] if f.endswith(".pdf"))
    assert pdf.read_bytes()[:5] == b"%PDF-"
    assert res["links"]["files"][0] == f"/api/v1/jobs/{job_id}/files/{res['files'][0]}"
    with factory() as session:
        assert jobs.job_file(session, job_id, pdf.name) == pdf
        # the content hash is that of the content built in a request (reference:
        # documents.audit_content, the synchronous `qualplan report audit`)
        content = documents.audit_content(session, spectra["program_id"])
        assert documents.content_hash(content) == res["content_hash"]
        assert res["release_ready"] == content.release_ready
        assert session.scalar(select(func.count()).select_from(m.Document).where(
            m.Document.number == res["number"])) == 1
    assert jobs.run_job(factory, job_id) == "skipped"
    # the caution a lab reads (shared caution text) is on the issued report
    from pypdf import PdfReader

    out = " ".join(" ".join(p.extract_text() for p in PdfReader(pdf).pages).split())
    assert "responsible engineer" in out


def test_two_claims_of_a_derivation_store_one_level(factory, spectra):
    """The exactly-once rule for a job that writes: a retried (second) claim of the same
    derivation stores its level only if it holds the claim; one level in the end."""
    name = f"claimed twice {uuid.uuid4().hex[:6]}"
    with unit_of_work(factory) as session:
        job_id = jobs.submit_derivation(session, ENG, _recipe(spectra, name),
                                        runner="thread").id
    out = _claim_twice(factory, job_id, timeout_s=120)
    assert out.count("succeeded") == 1, out
    with factory() as session:
        levels_made = session.scalars(select(m.Level).where(m.Level.name == name)).all()
        assert [lv.number for lv in levels_made] == [1]
        assert _job(factory, job_id).result["level_id"] == levels_made[0].id
