"""The program dashboard and the overlay plots in Debian's chromium at 1280 x 800: readiness
counts with symbol and word, blocking requirements with their reason, stale levels, no
horizontal scroll; the level plot's readout. Screenshots go to test-artifacts/."""

from __future__ import annotations

import re

from qualplan.planning import access, catalog, environments, levels, policies, requirements
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.web.conftest import SETUP, unique

FLIGHT = {"freq_hz": [20.0, 80.0, 500.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.01]}


def program_with_a_stale_level(factory, viewer: str) -> dict:
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, SETUP, s.ProgramCreate(name=unique("Dash")))
        access.grant(session, SETUP, viewer, prog.id, "viewer")  # the viewer is a member
        unit = catalog.create_product(session, SETUP, s.ProductCreate(
            program_id=prog.id, name="Dash unit"))
        phase = catalog.create_phase(session, SETUP, s.PhaseCreate(
            program_id=prog.id, name="flight", duration_s=3600.0, occurrences=10))
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=unit.id, phase_id=phase.id, name="flight Z", kind="random", axis="Z",
            data=FLIGHT))
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        level = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=unit.id, name="qual Z", kind="random", axis=m.Axis.Z,
            revision_ids=[env.revisions[-1].id], policy_id=gevs.id))
        for key in ("DSH-001", "DSH-002"):
            requirements.create_requirement(session, SETUP, s.RequirementCreate(
                program_id=prog.id, key=key, text=f"{key} text", product_id=unit.id,
                level_id=level.id if key == "DSH-001" else None,
                method=m.VerificationMethod.test if key == "DSH-001"
                else m.VerificationMethod.inspection))
        environments.revise_environment(session, SETUP, env.id, s.RevisionIn(
            data={"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.02, 0.02]}, note="new data"))
        return {"program_id": prog.id, "program": prog.name, "level_id": level.id}


def no_horizontal_scroll(page) -> None:
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= 1280, f"page is {width} px wide at a 1280 px window"


def test_dashboard_after_sign_in(new_page, users, factory, shots):
    made = program_with_a_stale_level(factory, users["viewer"].name)
    page = new_page()
    page.set_viewport_size({"width": 1280, "height": 800})
    page.goto("/")
    assert "/signin" in page.url
    page.get_by_label("Access token").fill(users["viewer"].token)
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url("**/dashboard")
    card = page.locator(f"#program-{made['program_id']}")
    text = card.text_content()
    # no evidence yet: both requirements open (a requirement without evidence is open
    # even when its level is stale); the level itself is listed as stale
    assert "○ open 2" in text and "✓ verified 0" in text and "✗ failed 0" in text
    assert "⊘ waived 0" in text and "⟳ stale 0" in text
    blocking = card.locator("table.blocking").inner_text()
    assert "DSH-001" in blocking and "DSH-002" in blocking
    stale = card.locator("ul.stale-levels").inner_text()
    assert "qual Z #1" in stale and "revision 2" in stale
    no_horizontal_scroll(page)
    shots(page, "dashboard-1280x800")
    # the programs list shows the same counts
    page.goto("/programs")
    row = page.locator("tr", has_text=made["program"])
    assert "○ open 2" in row.text_content() and "✓ verified 0" in row.text_content()
    no_horizontal_scroll(page)
    shots(page, "programs-1280x800")


def test_level_overlay_readout_and_width(new_page, users, factory, shots):
    made = program_with_a_stale_level(factory, users["viewer"].name)
    page = new_page()
    page.set_viewport_size({"width": 1280, "height": 800})
    page.goto("/signin")
    page.get_by_label("Access token").fill(users["viewer"].token)
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url("**/dashboard")
    page.goto(f"/levels/{made['level_id']}")
    plot = page.locator("#plot-level")
    assert plot.locator("path.curve").count() >= 2  # level and its inputs / limit
    plot.focus()
    page.keyboard.press("Home")
    readout = page.locator("#readout-level").inner_text()
    assert re.search(r"frequency 20 Hz", readout) and "g²/Hz" in readout, readout
    no_horizontal_scroll(page)
    shots(page, "level-readout-1280x800")
    page.goto(f"/products/{catalog_product(factory, made)}")
    no_horizontal_scroll(page)
    shots(page, "product-1280x800")


def catalog_product(factory, made) -> int:
    with unit_of_work(factory) as session:
        return levels.level_by_id(session, made["level_id"]).product_id
