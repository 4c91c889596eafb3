"""End to end in Debian's chromium (Playwright): the engineer's story, roles, bad input.

The service runs under uvicorn on 127.0.0.1 (tests/web/conftest.py); screenshots of
every step go to test-artifacts/screenshots/.
"""

from __future__ import annotations

import re
import time

from qualplan.planning import environments
from qualplan.store.session import unit_of_work
from tests.web.test_pages import WORKMANSHIP_CSV


def sign_in(page, token: str, shots=None, name: str = "") -> None:
    page.goto("/programs")
    assert "/signin" in page.url
    if shots:
        shots(page, name)
    page.get_by_label("Access token").fill(token)
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url("**/programs")


def upload_file(page, product_id, name, content, units="g^2/Hz", phase=None):
    page.goto(f"/products/{product_id}")
    form = page.locator("#upload")
    form.get_by_label("Name").fill(name)
    form.get_by_label("Kind").select_option("random")
    form.get_by_label("Axis").select_option("Z")
    if phase:
        form.get_by_label("Life phase").select_option(label=phase)
    if units:
        form.get_by_label("Units of the values").select_option(units)
    form.get_by_label("File").set_input_files(
        {"name": "flight.csv", "mimeType": "text/csv", "buffer": content})
    form.get_by_role("button", name="Upload").click()
    page.wait_for_load_state()


def verdict(page, program_id) -> str:
    page.goto(f"/programs/{program_id}/audit")
    return page.locator("#verdict").inner_text()


def test_engineer_story(new_page, users, world, shots):
    page = new_page()
    sign_in(page, users["engineer"].token, shots, "01-sign-in")
    shots(page, "02-programs")

    # upload an environment CSV with its units chosen explicitly
    upload_file(page, world.product_id, "flight Z", WORKMANSHIP_CSV, phase=world.phase)
    page.wait_for_url("**/environments/*")
    # NASA-STD-7001B workmanship spectrum: 6.8 g rms printed, 6.784 exact (closed form)
    assert "6.784 g rms" in page.locator("dl.summary").inner_text()
    plot = page.locator("#plot-env")
    assert plot.locator("path.curve").count() == 1
    ticks = plot.locator("text.tick").all_text_contents()
    assert {"10", "100", "1000", "10000"} <= set(ticks)  # decades labelled
    box = plot.locator("svg").bounding_box()
    page.mouse.move(box["x"] + box["width"] * 0.5, box["y"] + box["height"] * 0.5)
    readout = page.locator("#readout-env").inner_text()
    assert re.search(r"frequency [\d.]+ Hz", readout) and "g²/Hz" in readout, readout
    # keyboard reading: focus the plot, Home = first breakpoint (20 Hz, 0.01 g^2/Hz)
    plot.focus()
    page.keyboard.press("Home")
    assert "frequency 20 Hz" in page.locator("#readout-env").inner_text()
    assert "revision 1: 0.01 g²/Hz" in page.locator("#readout-env").inner_text()
    page.mouse.move(box["x"] + box["width"] * 0.35, box["y"] + box["height"] * 0.4)
    shots(page, "03-environment-plot")

    # derive a level
    page.goto(f"/products/{world.product_id}")
    shots(page, "04-product")
    form = page.locator("#derive")
    form.get_by_label("Name", exact=True).fill("qual random Z")
    form.get_by_label("Kind").select_option("random")
    form.get_by_label("Axis", exact=True).select_option("Z")
    form.get_by_label("Margin policy").select_option(label="spaceflight-gevs")
    form.get_by_label(re.compile("flight Z r1")).check()
    form.get_by_role("button", name="Derive").click()
    page.wait_for_url("**/levels/*")
    assert page.locator("figure.plot").count() == 4  # level + FDS + ERS + ERS ratio
    assert page.locator("#plot-level path.dashed").count() == 2  # tolerance band
    assert "worst natural frequency" in page.content()
    shots(page, "05-level-coverage")
    level_csv = page.request.get(page.url + "/breakpoints.csv").text()

    # a requirement on that level, through the matrix page
    page.goto(f"/programs/{world.program_id}/requirements")
    req = page.locator("form[action$='/requirements']")
    req.get_by_label("Key").fill("ENV-001")
    req.get_by_label("Requirement").fill("Survive the qualification random vibration, Z")
    req.get_by_label("Level").select_option(label="qual random Z #1")
    req.get_by_label("Verification").select_option("test")
    req.get_by_role("button", name="Add requirement").click()
    page.wait_for_url("**/requirements/*")
    req_url = page.url
    before = verdict(page, world.program_id)
    assert "1 open" in before
    shots(page, "06-audit-open")

    # a failing test record: the achieved PSD 4 dB under the demand (outside +/-3 dB)
    rows = [r.split(",") for r in level_csv.strip().splitlines()
            if not r.startswith("#")][1:]  # the one export format: # lines, header
    low = "\n".join(f"{f},{float(a) * 10 ** (-4 / 10):.6g}" for f, a in rows).encode()
    page.goto(req_url)
    test = page.locator("#test")
    test.get_by_label("Units of the values").select_option("g^2/Hz")
    test.get_by_label("Test duration [s]").fill("120")
    test.get_by_label("File").set_input_files(
        {"name": "run-17.csv", "mimeType": "text/csv", "buffer": low})
    test.get_by_role("button", name="Add test record").click()
    page.wait_for_load_state()
    assert page.locator("#form-error").count() == 0, page.locator("#form-error").inner_text()
    assert "failed" in page.locator("dl.summary .status").text_content()
    assert "outside" in page.locator("#status-reason").inner_text()
    shots(page, "07-requirement-failed")
    after = verdict(page, world.program_id)
    assert after != before and "1 failed" in after
    shots(page, "08-audit-failed")

    # sign out: the pages ask for a sign-in again
    page.get_by_role("button", name="Sign out").click()
    page.wait_for_url("**/signin")
    page.goto(f"/programs/{world.program_id}/audit")
    assert "/signin" in page.url

    # an approver waives the failed requirement: the audit verdict turns to release
    sign_in(page, users["approver"].token)
    page.goto(req_url)
    waive = page.locator("#waive")
    waive.get_by_label("Rationale").fill("Shortfall accepted by the customer review board")
    # a waiver runs at most the policy's max_waiver_days (365 by default): 300 days here
    waive.get_by_label("Expires on").fill(
        time.strftime("%Y-%m-%d", time.gmtime(time.time() + 300 * 86400)))
    waive.get_by_role("button", name="Waive").click()
    page.wait_for_load_state()
    assert "waived" in page.locator("dl.summary .status").text_content()
    assert verdict(page, world.program_id).startswith("READY FOR RELEASE")
    shots(page, "09-audit-waived")


def test_viewer_sees_no_forms_and_forged_post_is_refused(new_page, users, world, factory,
                                                         shots):
    page = new_page()
    sign_in(page, users["viewer"].token)
    page.goto(f"/products/{world.product_id}")
    assert page.locator("form[method='post']").count() == 1  # sign out only
    assert page.locator("input[type='file']").count() == 0
    shots(page, "10-viewer-product")
    # a forged POST with the viewer's own valid CSRF token: planning refuses the role
    csrf = page.locator("input[name='csrf']").first.get_attribute("value")
    r = page.request.post(f"/products/{world.product_id}/environments", multipart={
        "csrf": csrf, "name": "forged", "kind": "random", "axis": "Z",
        "value_units": "g^2/Hz",
        "file": {"name": "f.csv", "mimeType": "text/csv", "buffer": WORKMANSHIP_CSV}})
    assert r.status == 403 and "needs the role engineer" in r.text()
    # and a POST without any CSRF token (another site's form) is refused before that
    r = page.request.post("/programs", form={"name": "forged"})
    assert r.status == 403 and "CSRF" in r.text()
    with unit_of_work(factory) as session:
        assert environments.list_environments(session, product_id=world.product_id) == []


def test_bad_file_message_and_nothing_stored(new_page, users, world, factory, shots):
    page = new_page()
    sign_in(page, users["engineer"].token)
    upload_file(page, world.product_id, "bad PSD", b"20,0.01\n80,-0.04\n2000,0.01\n")
    message = page.locator("#form-error").inner_text()
    assert "Not saved." in message and "asd_g2_hz[1]" in message, message
    shots(page, "11-bad-input")
    upload_file(page, world.product_id, "no units", WORKMANSHIP_CSV, units=None)
    assert "say the units of the values" in page.locator("#form-error").inner_text()
    with unit_of_work(factory) as session:
        assert environments.list_environments(session, product_id=world.product_id) == []
