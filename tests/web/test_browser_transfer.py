"""In Debian's chromium (Playwright): an engineer carries the pod's environment down to a
board from the board's page (mounting, transfer rule, transferred environment), a bad
value is refused on the page with its field and value, and the level page plots the
notched input. Screenshots go to test-artifacts/screenshots/.

Numbers by hand (closed form): unit X along the pod's -Z takes the pod's Z ASD,
0.04 g^2/Hz flat over 20-2000 Hz, times |T|^2 = 1.5^2 of a flat zone transmissibility:
0.09 g^2/Hz, overall sqrt(0.09 x 1980) = 13.35 g rms.
"""

from __future__ import annotations

import math

from qualplan.planning import catalog, environments, transfers
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.web.conftest import SETUP, unique
from tests.web.test_browser import sign_in


def test_engineer_carries_an_environment_down_from_the_product_page(new_page, users, world,
                                                                    factory, shots):
    with unit_of_work(factory) as session:
        board = catalog.create_product(session, SETUP, s.ProductCreate(
            program_id=world.program_id, name=unique("Sensor board"),
            parent_id=world.product_id, mass_kg=0.6))
        pod_z = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, name="pod flight Z", kind=m.EnvironmentKind.random,
            axis=m.Axis.Z, phase_id=world.phase_id,
            data={"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04]}))
        board_id, pod_z_id = board.id, pod_z.id
    page = new_page()
    sign_in(page, users["engineer"].token)
    page.goto(f"/products/{board_id}")
    assert page.locator("#tree").get_by_text("No mounting stated").count() == 1

    # a bad direction cosine: the page says which field and value, nothing is stored
    form = page.locator("#mounting")
    form.get_by_label("Given as").select_option("matrix")
    form.get_by_label("Direction cosines of X").fill("0, 0, minus")
    form.get_by_role("button", name="Set the mounting").click()
    page.wait_for_load_state()
    alert = page.locator("#mounting #form-error").inner_text()
    assert "Not saved." in alert and "matrix.X" in alert and "'minus'" in alert, alert
    assert form.get_by_label("Direction cosines of X").input_value() == "0, 0, minus"
    shots(page, "transfer-01-bad-mounting")
    with unit_of_work(factory) as session:
        assert transfers.read_mounting(session, board_id) is None

    # the mounting as a signed permutation: X = pod -Z, Y = pod X, Z = pod -Y
    form = page.locator("#mounting")
    form.get_by_label("Given as").select_option("axes")
    form.get_by_label("X of the unit along").select_option("-Z")
    form.get_by_label("Y of the unit along").select_option("X")
    form.get_by_label("Z of the unit along").select_option("-Y")
    form.get_by_label("Note").fill("bracket B2, drawing 114-02")
    form.get_by_role("button", name="Set the mounting").click()
    page.wait_for_url(f"**/products/{board_id}#mounting")
    assert "X = " in page.locator("#tree").inner_text()
    assert "-Z" in page.locator("#tree").inner_text()

    # a zone transmissibility
    form = page.locator("#rule")
    form.get_by_label("Name (new rule)").fill("pod shelf zone")
    form.get_by_label("Kind (new rule)").select_option("zone_transmissibility")
    form.get_by_label("Transmissibility table").fill("20, 1.5\n2000, 1.5")
    form.get_by_label("Basis").select_option("test")
    form.get_by_label("Provenance").fill("low-level survey, report 12 (invented)")
    form.get_by_role("button", name="Save the rule").click()
    page.wait_for_url(f"**/products/{board_id}#rules")
    rules = page.locator("table#rules").inner_text()
    assert "pod shelf zone" in rules and "1.5–1.5 g/g" in rules, rules

    # derive the board's X from the pod's Z through the mounting and the rule
    form = page.locator("#transfer")
    form.get_by_label("Name", exact=True).fill("board flight X")
    form.get_by_label("Axis of").select_option("X")
    form.get_by_label("pod flight Z").check()
    form.get_by_label("pod shelf zone").check()
    shots(page, "transfer-02-product-forms")
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= 1280, f"the product page is {width} px wide"
    form.get_by_role("button", name="Derive").click()
    page.wait_for_url("**/environments/*")
    # 0.04 x 1.5^2 = 0.09 g^2/Hz over 20-2000 Hz: sqrt(0.09 x 1980) g rms (closed form)
    want = math.sqrt(0.09 * 1980.0)
    summary = page.locator("dl.summary").inner_text()
    assert f"{want:.4g} g rms" in summary, summary
    shots(page, "transfer-03-derived-environment")

    page.goto(f"/products/{board_id}")
    origins = page.get_by_role("table").filter(has_text="origin").inner_text()
    assert "transferred" in origins and "pod shelf zone r1" in origins
    with unit_of_work(factory) as session:
        (got,) = [o for o in transfers.environments_for(session, board_id)
                  if o.name == "board flight X"]
        assert got.origin == "transferred" and got.inputs == ["pod flight Z r1"]
        assert pod_z_id in [o.id for o in transfers.environments_for(session, board_id)
                            if o.origin == "replaced"]


def test_level_page_plots_the_notched_inputs(new_page, users, world, factory, shots):
    from tests.web.test_transfer_forms import notched_level

    level_id = notched_level(factory, world)
    page = new_page()
    sign_in(page, users["viewer"].token)
    page.goto(f"/levels/{level_id}")
    fig = page.locator('figure[data-plot="level"]')
    legend = fig.inner_text()
    assert "notched input (response limit at monitor A3)" in legend, legend
    assert "input notched by the force limit (C² = 2, f0 = 180 Hz)" in legend
    with unit_of_work(factory) as session:
        n = len(transfers.level_force_limit(session, level_id).notches)
    assert f"force limited: {n} predicted notch(es)" in legend
    # each series is one drawn curve: level, band (2), limit level, 2 notched inputs
    assert fig.locator("path.curve").count() >= 6
    shots(page, "transfer-04-notched-level")
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= 1280, f"the level page is {width} px wide"
