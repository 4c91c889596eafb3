"""Documents issued from the web as jobs: the product page's form issues the test-level
specification, the audit page's form the margin-closure audit report; each goes to the
job's page, which links the files the job wrote. A refused form names the field and the
value and queues nothing.

On PostgreSQL the job waits in the procrastinate queue: the test runs a burst worker (as
`qualplan worker` would), in a thread of its own (a browser test run earlier in the
session may hold this thread's event loop)."""

from __future__ import annotations

import re
import threading
import time
from html import unescape

from qualplan.planning import environments, levels, policies
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.dbutil import backend
from tests.web.conftest import SETUP

FLAT = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04]}


def _level(factory, world) -> None:
    with unit_of_work(factory) as session:
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, name="flight Z", kind=m.EnvironmentKind.random,
            axis=m.Axis.Z, phase_id=world.phase_id, data=FLAT))
        pol = policies.policy_ref(session, "spaceflight-gevs")
        levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="qual random Z", kind="random", axis=m.Axis.Z,
            revision_ids=[env.revisions[-1].id], policy_id=pol.id))


def _jobs(factory) -> int:
    with unit_of_work(factory) as session:
        return session.query(m.Job).count()


def _run_to_end(client, db_url, job_path: str) -> str:
    if backend() == "postgresql":
        from qualplan.planning.queue import run_worker

        worker = threading.Thread(target=run_worker, args=(db_url,), kwargs={"wait": False})
        worker.start()
        worker.join(120)
    deadline = time.monotonic() + 120
    while True:
        html = client.get(job_path).text
        status = re.search(r'id="job-status">([a-z]+)<', html).group(1)
        if status not in ("queued", "running"):
            return html
        assert time.monotonic() < deadline, html[:2000]
        time.sleep(0.2)


def test_specification_issued_from_the_product_page_as_a_job(browserless, users, world,
                                                             factory, db_url):
    _level(factory, world)
    eng = browserless(users["engineer"])
    page = eng.get(f"/products/{world.product_id}").text
    assert "Issue (runs as a job)" in page
    r = eng.post(f"/products/{world.product_id}/specification",
                 {"grade": "qualification", "note": "for the vibration lab"},
                 follow_redirects=False)
    assert r.status_code == 303, r.text[:1000]
    job_path = r.headers["location"]
    assert re.fullmatch(r"/jobs/\d+", job_path)
    html = unescape(_run_to_end(eng, db_url, job_path))
    assert 'id="job-status">succeeded<' in html, html[:3000]
    assert "revision 1 (issued)" in html
    pdf = re.search(rf'href="({job_path}/files/[^"]+\.pdf)"', html).group(1)
    body = eng.get(pdf)
    assert body.status_code == 200 and body.content[:5] == b"%PDF-"


def test_audit_report_issued_from_the_audit_page_as_a_job(browserless, users, world,
                                                         factory, db_url):
    _level(factory, world)
    eng = browserless(users["engineer"])
    assert "Issue the audit report of this scope" in eng.get(
        f"/programs/{world.program_id}/audit").text
    r = eng.post(f"/programs/{world.program_id}/audit", {"product_id": "", "note": ""},
                 follow_redirects=False)
    assert r.status_code == 303, r.text[:1000]
    html = unescape(_run_to_end(eng, db_url, r.headers["location"]))
    assert 'id="job-status">succeeded<' in html, html[:3000]
    # no requirement in the program: nothing blocks its release (the audit's verdict)
    assert re.search(r"READY|ready", html)
    assert re.search(r'href="/jobs/\d+/files/[^"]+\.pdf"', html)


def test_refused_issue_forms_name_the_field_and_queue_nothing(browserless, users, world,
                                                             factory):
    _level(factory, world)
    before = _jobs(factory)
    eng = browserless(users["engineer"])
    eng.get(f"/products/{world.product_id}")
    r = eng.post(f"/products/{world.product_id}/specification", {"grade": "flight-ish"},
                 follow_redirects=False)
    assert r.status_code == 422
    text = unescape(r.text)
    assert "grade" in text and "flight-ish" in text
    r = eng.post(f"/products/{world.product_id}/specification",
                 {"grade": "qualification", "number": "N" * 600}, follow_redirects=False)
    assert r.status_code == 422
    assert "number = 'NNN" in unescape(r.text) and "at most 500 characters" in r.text
    viewer = browserless(users["viewer"])
    assert "Issue (runs as a job)" not in viewer.get(f"/products/{world.product_id}").text
    r = viewer.post(f"/products/{world.product_id}/specification", {"grade": "qualification"},
                    follow_redirects=False)
    assert r.status_code == 403
    assert _jobs(factory) == before
