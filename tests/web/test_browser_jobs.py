"""A derivation run as a job from the product page: the job's page with its progress bar,
reloaded until done, then the level it links (Debian's chromium through Playwright).

On PostgreSQL the job waits in the procrastinate queue until a worker takes it: the test
runs a burst worker (as `qualplan worker` would) once the page has shown the queued job.
"""

from __future__ import annotations

import re

from tests.dbutil import backend
from tests.web.test_browser import sign_in, upload_file
from tests.web.test_pages import WORKMANSHIP_CSV


def test_derive_as_a_job_shows_its_progress_and_links_the_level(new_page, users, world, shots,
                                                                 db_url):
    page = new_page()
    sign_in(page, users["engineer"].token)
    upload_file(page, world.product_id, "flight Z", WORKMANSHIP_CSV, phase=world.phase)
    page.wait_for_url("**/environments/*")
    # NASA-STD-7001B workmanship spectrum: 6.8 g rms printed, 6.784 exact (the same
    # check as the engineer's story)
    assert "6.784 g rms" in page.locator("dl.summary").inner_text()
    page.goto(f"/products/{world.product_id}")
    form = page.locator("#derive")
    form.get_by_label("Name", exact=True).fill("qual random Z")
    form.get_by_label("Kind").select_option("random")
    form.get_by_label("Axis", exact=True).select_option("Z")
    form.get_by_label("Margin policy").select_option(label="spaceflight-gevs")
    form.get_by_label(re.compile("flight Z r1")).check()
    form.get_by_label(re.compile("Run as a job")).check()
    shots(page, "jobs-01-derive-as-job")
    form.get_by_role("button", name="Derive").click()
    page.wait_for_url(re.compile(r".*/jobs/\d+$"))
    bar = page.locator("progress#job-progress")
    assert bar.get_attribute("max") == "1"
    if backend() == "postgresql":
        assert page.locator("#job-status").inner_text() == "queued"
        assert page.locator("meta[http-equiv=refresh]").count() == 1
        shots(page, "jobs-02-queued")
        import threading

        from qualplan.planning.queue import run_worker

        # a thread of its own: Playwright's sync API holds this thread's event loop
        worker = threading.Thread(target=run_worker, args=(db_url,), kwargs={"wait": False})
        worker.start()
        worker.join(120)
    from playwright.sync_api import expect

    # the page reloads itself (meta refresh) until the job is done
    expect(page.locator("#job-status")).to_have_text("succeeded", timeout=60_000)
    assert bar.get_attribute("value") == "1.0"
    assert page.locator("meta[http-equiv=refresh]").count() == 0  # done: no more reloads
    shots(page, "jobs-03-done")
    page.locator("#job-result a").click()
    page.wait_for_url("**/levels/*")
    assert "qual random Z #1" in page.content()
    # the level page of the job's level, with its overall value and unit (the numbers of
    # a derivation as a job are checked in tests/api/test_jobs_api.py)
    assert re.search(r"overall\s*[\d.]+ g rms", page.locator("dl").first.inner_text(), re.I)
    shots(page, "jobs-04-level")
