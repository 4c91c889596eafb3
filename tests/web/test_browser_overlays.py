"""The overlay plots in Debian's chromium at 1280 x 800: a test record against its level
and tolerance band, the test sequence's FDS and ERS against the life per axis, the
environment's revisions with the dB difference; each with its readout, an SVG download
and no horizontal scroll. Screenshots go to test-artifacts/screenshots/."""

from __future__ import annotations

import re

from tests.web.overlay_world import overlay_program
from tests.web.test_browser_dashboard import no_horizontal_scroll


def _signed_in(new_page, user):
    page = new_page()
    page.set_viewport_size({"width": 1280, "height": 800})
    page.goto("/signin")
    page.get_by_label("Access token").fill(user.token)
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url("**/dashboard")
    return page


def _svg_link(page, plot_id: str) -> None:
    link = page.locator(f"#svg-{plot_id}")
    href = link.get_attribute("href")
    r = page.request.get(href)
    assert r.status == 200 and r.headers["content-type"].startswith("image/svg+xml")


def test_record_against_level_readout(new_page, users, factory, shots):
    made = overlay_program(factory, users["viewer"].name)
    page = _signed_in(new_page, users["viewer"])
    page.goto(f"/requirements/{made['requirement_id']}")
    page.get_by_role("link", name=f"{made['evidence_id']} (plot)").click()
    page.wait_for_url(f"**/evidence/{made['evidence_id']}")
    assert "✗ failed" in page.locator("#record-verdict").inner_text()
    plot = page.locator("#plot-record")
    # record, level, upper and lower tolerance lines
    assert plot.locator("path.curve").count() == 4
    plot.focus()
    page.keyboard.press("Home")
    readout = page.locator("#readout-record").inner_text()
    assert re.search(r"frequency 20 Hz", readout), readout
    assert "tolerance ±3 dB (upper)" in readout and "g²/Hz" in readout, readout
    box = plot.locator("svg").bounding_box()
    page.mouse.move(box["x"] + box["width"] * 0.45, box["y"] + box["height"] * 0.5)
    assert re.search(r"frequency [\d.]+ Hz", page.locator("#readout-record").inner_text())
    _svg_link(page, "record")
    no_horizontal_scroll(page)
    shots(page, "record-against-level-1280x800")


def test_sequence_coverage_readout(new_page, users, factory, shots):
    made = overlay_program(factory, users["viewer"].name)
    page = _signed_in(new_page, users["viewer"])
    page.goto(f"/products/{made['product_id']}")
    page.locator("#sequence-links").get_by_role("link", name="qualification").click()
    page.wait_for_url("**/coverage?grade=qualification")
    assert page.locator("#axis-Z h2").inner_text() == "Axis Z"
    ers = page.locator("#plot-seq-Z-2")
    assert ers.locator("path.curve").count() == 3  # test sequence, life, over-test ceiling
    ers.focus()
    page.keyboard.press("Home")
    readout = page.locator("#readout-seq-Z-2").inner_text()
    assert "natural frequency" in readout and "over-test ceiling" in readout, readout
    assert " g" in readout
    for n in (1, 2, 3):
        _svg_link(page, f"seq-Z-{n}")
    no_horizontal_scroll(page)
    page.locator("#plot-seq-Z-2").scroll_into_view_if_needed()
    shots(page, "sequence-coverage-1280x800")


def test_revisions_overlay_with_difference(new_page, users, factory, shots):
    made = overlay_program(factory, users["viewer"].name)
    page = _signed_in(new_page, users["viewer"])
    page.goto(f"/environments/{made['env_id']}")
    assert page.locator("#plot-env path.curve").count() == 2  # revisions 2 and 1
    diff = page.locator("#plot-env-diff")
    diff.focus()
    page.keyboard.press("End")
    readout = page.locator("#readout-env-diff").inner_text()
    assert "dB" in readout and "r2 / r1" in readout, readout
    _svg_link(page, "env")
    no_horizontal_scroll(page)
    shots(page, "revisions-overlay-1280x800")
