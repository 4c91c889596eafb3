"""The product page's forms that carry environments down the tree: the unit's mounting in
its parent, a transfer rule (create, revise) and a transferred environment; a refused
form shows the field and the value and stores nothing. The level plot draws the stored
notched input.

Numbers are checked by hand: a signed permutation maps unit X to the parent's -Z (the
ASD of an axis does not change sign, closed form); a zone transmissibility multiplies
an ASD by |T|^2 (NASA-HDBK-7005 zone method, the transfer of an ASD through a gain,
closed form).
"""

from __future__ import annotations

import json
import re
from html import unescape

import pytest

from qualplan.planning import catalog, environments, levels, notching, policies, transfers
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.corpus import changed, db_state
from tests.web.conftest import SETUP, unique

FLAT = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04]}


def _tree(factory, world, *, mass_kg=None):
    """A pod (the world's unit) with random Z and X inputs and a board mounted in it."""
    with unit_of_work(factory) as session:
        board = catalog.create_product(session, SETUP, s.ProductCreate(
            program_id=world.program_id, name=unique("board"), parent_id=world.product_id,
            mass_kg=mass_kg))
        z = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, name="flight Z", kind=m.EnvironmentKind.random,
            axis=m.Axis.Z, phase_id=world.phase_id, data=FLAT))
        x = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, name="flight X", kind=m.EnvironmentKind.random,
            axis=m.Axis.X, phase_id=world.phase_id,
            data={"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01]}))
        return board.id, z.id, x.id


def _stored(factory, board_id):
    with unit_of_work(factory) as session:
        origins = transfers.environments_for(session, board_id)
        mounting = transfers.read_mounting(session, board_id)
        prog = catalog.product_by_id(session, board_id).program_id
        rules = transfers.list_rules(session, prog)
        events = session.query(m.Event).filter(m.Event.entity_id == board_id,
                                               m.Event.entity == "product").count()
        return origins, mounting, rules, events


def test_forms_set_mounting_create_and_revise_rule_derive(browserless, users, world, factory):
    board_id, z_id, x_id = _tree(factory, world)
    eng = browserless(users["engineer"])
    page = eng.get(f"/products/{board_id}").text
    assert "Set the mounting" in page and "Create or revise a transfer rule" in page
    assert "No mounting stated" in page
    # unit X along the pod's -Z, Y along X, Z along -Y (a rotation, determinant +1)
    r = eng.post(f"/products/{board_id}/mounting", {
        "frame": "axes", "axes.X": "-Z", "axes.Y": "X", "axes.Z": "-Y", "note": "bracket B2"},
        follow_redirects=False)
    assert r.status_code == 303, r.text[:800]
    origins, mounting, rules, _ = _stored(factory, board_id)
    assert mounting.frame["axes"] == {"X": "-Z", "Y": "X", "Z": "-Y"}
    assert mounting.frame["matrix"] == [[0, 0, -1], [1, 0, 0], [0, -1, 0]]
    page = eng.get(f"/products/{board_id}").text
    assert "Mounted with X = " in page and "bracket B2" in page

    r = eng.post(f"/products/{board_id}/transfer-rules", {
        "rule_id": "", "name": "shelf zone", "kind": "zone_transmissibility",
        "table": "20, 2\n2000, 2\n", "basis": "test", "provenance": "survey report 12"},
        follow_redirects=False)
    assert r.status_code == 303, r.text[:800]
    (rule,) = [x for x in _stored(factory, board_id)[2] if x.name == "shelf zone"]
    assert rule.spec == {"freq_hz": [20.0, 2000.0], "gain": [2.0, 2.0]} and rule.revision == 1

    r = eng.post(f"/products/{board_id}/transferred-environments", {
        "name": "flight X (board)", "axis": "X", "parent_environment_ids": str(z_id),
        "rule_ids": str(rule.id), "phase_id": ""}, follow_redirects=False)
    assert r.status_code == 303, r.text[:800]
    env_id = int(r.headers["location"].rsplit("/", 1)[1])
    with unit_of_work(factory) as session:
        rev = environments.history(session, env_id)[-1]
        # unit X = pod -Z: the pod's Z ASD, times |T|^2 = 4 (closed form)
        assert rev.spec["freq_hz"] == [20.0, 2000.0]
        assert rev.spec["asd_g2_hz"] == pytest.approx([0.16, 0.16], rel=1e-12)
    origins = {o.name: o for o in _stored(factory, board_id)[0]}
    got = origins["flight X (board)"]
    assert got.origin == "transferred" and not got.stale
    assert any("shelf zone r1" in t for t in got.through)

    # revise the rule through the same form: the transferred environment becomes stale
    r = eng.post(f"/products/{board_id}/transfer-rules", {
        "rule_id": str(rule.id), "table": "20, 2\n2000, 1.5", "basis": "test",
        "provenance": "survey report 13", "note": "second survey"}, follow_redirects=False)
    assert r.status_code == 303, r.text[:800]
    (rule,) = [x for x in _stored(factory, board_id)[2] if x.name == "shelf zone"]
    assert rule.revision == 2 and rule.spec["gain"] == [2.0, 1.5]
    got = {o.name: o for o in _stored(factory, board_id)[0]}["flight X (board)"]
    assert got.stale and "transfer rule 'shelf zone' has revision 2" in got.stale_reasons[0]
    page = unescape(eng.get(f"/products/{board_id}").text)
    assert "transfer rule 'shelf zone' has revision 2" in page

    # a rotated mounting given as direction cosines (45 degrees about the pod's X)
    c = 0.5 ** 0.5
    r = eng.post(f"/products/{board_id}/mounting", {
        "frame": "matrix", "matrix.X": "1 0 0", "matrix.Y": f"0, {c}, {c}",
        "matrix.Z": f"0; -{c}; {c}", "expected_version": str(mounting.version)},
        follow_redirects=False)
    assert r.status_code == 303, r.text[:800]
    mounting = _stored(factory, board_id)[1]
    assert mounting.frame["axes"] is None
    assert mounting.frame["matrix"][1] == pytest.approx([0, c, c], rel=1e-12)
    assert "Mounted at a rotation" in eng.get(f"/products/{board_id}").text


@pytest.mark.parametrize("path, data, field, value", [
    ("mounting", {"frame": "matrix", "matrix.X": "1, 0, abc", "matrix.Y": "0 1 0",
                  "matrix.Z": "0 0 1"}, "matrix.X", "abc"),
    ("mounting", {"frame": "matrix", "matrix.X": "1 0 0", "matrix.Y": "0 1 0",
                  "matrix.Z": "0 0 -1"}, "matrix", "[[1.0, 0.0, 0.0]"),
    ("mounting", {"frame": "axes", "axes.X": "Z", "axes.Y": "Z", "axes.Z": "X"}, "axes",
     "'X': 'Z'"),
    ("transfer-rules", {"rule_id": "", "name": "zone", "kind": "zone_transmissibility",
                        "table": "20, 1\n150 four\n2000, 1", "basis": "test"},
     "table line 2", "'four'"),
    ("transfer-rules", {"rule_id": "", "name": "zone", "kind": "zone_transmissibility",
                        "table": "# survey 12\n20, 1\n\n2000, -3", "basis": "test"},
     "table line 4 (|T|)", "-3"),
    ("transfer-rules", {"rule_id": "", "name": "zone", "kind": "zone_transmissibility",
                        "table": "20, 1\n20, 2", "basis": "test"}, "table", "20"),
    ("transfer-rules", {"rule_id": "", "name": "zone", "kind": "zone_transmissibility",
                        "table": "20, 1\n200, 2", "basis": "survey"}, "basis", "survey"),
    ("transfer-rules", {"rule_id": "", "name": "light", "kind": "mass_attenuation",
                        "method": "mass_loading", "mounting_mass_kg": "nan",
                        "basis": "handbook"}, "mounting_mass_kg", "nan"),
    ("transferred-environments", {"name": "X (board)", "axis": "X",
                                  "parent_environment_ids": "Z_ENV"},
     "parent_environment_ids[0]", "Z_ENV"),
    ("transferred-environments", {"name": "X (board)", "axis": "Q",
                                  "parent_environment_ids": "Z_ENV"}, "axis", "Q"),
])
def test_bad_form_value_names_field_and_value_and_stores_nothing(
        browserless, users, world, factory, path, data, field, value):
    board_id, z_id, x_id = _tree(factory, world)
    data = {k: {"Z_ENV": str(z_id), "X_ENV": str(x_id)}.get(v, v) for k, v in data.items()}
    value = {"Z_ENV": f"= {z_id}: "}.get(value, value)
    eng = browserless(users["engineer"])
    eng.get(f"/products/{board_id}")
    before = _stored(factory, board_id)
    state = db_state(factory)
    r = eng.post(f"/products/{board_id}/{path}", data, follow_redirects=False)
    assert r.status_code == 422, r.text[:800]
    html = unescape(r.text)
    alert = re.search(r'<div class="message error" role="alert" id="form-error">(.*?)</div>',
                      html, re.S)
    assert alert is not None, html[:2000]
    assert "Not saved." in alert.group(1)
    assert field in alert.group(1) and value in alert.group(1), alert.group(1)
    # the page is the product page again, the form refilled
    assert "Set the mounting" in html
    after = _stored(factory, board_id)
    assert after[1] is None and after[2] == before[2] and after[3] == before[3]
    assert [o.name for o in after[0]] == [o.name for o in before[0]]
    # nothing at all was written: row count and content of every table unchanged
    assert db_state(factory) == state, changed(state, db_state(factory))


def test_viewer_sees_no_transfer_forms_and_is_refused(browserless, users, world, factory):
    board_id, z_id, _ = _tree(factory, world)
    viewer = browserless(users["viewer"])
    page = viewer.get(f"/products/{board_id}").text
    assert "Mounting in " in page and "Set the mounting" not in page
    r = viewer.post(f"/products/{board_id}/mounting", {
        "frame": "axes", "axes.X": "X", "axes.Y": "Y", "axes.Z": "Z"}, follow_redirects=False)
    assert r.status_code == 403 and "Not saved." in r.text
    assert _stored(factory, board_id)[1] is None
    # a form without the CSRF token is refused before anything runs
    eng = browserless(users["engineer"])
    eng.get(f"/products/{board_id}")
    r = eng.post(f"/products/{board_id}/mounting", {
        "frame": "axes", "axes.X": "X", "axes.Y": "Y", "axes.Z": "Z"}, csrf=False)
    assert r.status_code == 403 and "CSRF" in r.text
    assert _stored(factory, board_id)[1] is None


def test_top_product_refusal_is_shown_at_the_top(browserless, users, world, factory):
    """A product without a parent has no transfer forms; a POST to one is refused with
    the message at the top of its page, and nothing is stored."""
    eng = browserless(users["engineer"])
    eng.get(f"/products/{world.product_id}")
    r = eng.post(f"/products/{world.product_id}/mounting", {
        "frame": "axes", "axes.X": "X", "axes.Y": "Y", "axes.Z": "Z"}, follow_redirects=False)
    assert r.status_code == 422
    alert = re.search(r'role="alert" id="form-error">(.*?)</div>', unescape(r.text), re.S)
    assert alert is not None and "product_id = " in alert.group(1)
    assert "has no parent to be mounted in" in alert.group(1)
    with unit_of_work(factory) as session:
        assert transfers.read_mounting(session, world.product_id) is None


def _plot_data(html: str, plot_id: str) -> dict:
    m_ = re.search(rf'<script type="application/json" id="data-{plot_id}">(.*?)</script>',
                   html, re.S)
    assert m_ is not None
    return json.loads(unescape(m_.group(1)))


def notched_level(factory, world) -> int:
    """A random X qualification level of the world's unit, notched against a response
    limit and force limited with one mode (inputs invented), through planning."""
    with unit_of_work(factory) as session:
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, name="flight X", kind=m.EnvironmentKind.random,
            axis=m.Axis.X, phase_id=world.phase_id, data=FLAT))
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        lv = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="random X", kind="random", axis=m.Axis.X,
            revision_ids=[env.revisions[-1].id], policy_id=gevs.id))
        # a survey peak at 150 Hz (invented); limit 0.2 g^2/Hz at the monitor
        notching.set_notching(session, SETUP, lv.id, notching.NotchingIn(
            location="monitor A3", limit=0.2,
            transmissibility_freq_hz=[20.0, 100.0, 150.0, 220.0, 2000.0],
            transmissibility_gain=[1.0, 1.5, 8.0, 1.5, 1.0],
            transmissibility_source="low-level survey"))
        transfers.set_level_force_limit(session, SETUP, lv.id, transfers.ForceLimitIn(
            mass_kg=2.4, c2=2.0, f0_hz=180.0, modes=[{"fn_hz": 180.0, "mass_kg": 1.5,
                                                      "q": 20.0}],
            residual_mass_kg=0.5))
        return lv.id


def test_level_plot_draws_the_stored_notching_and_force_limit(browserless, users, world,
                                                              factory):
    """The plotted notched inputs are the stored ones, point for point (the web plot's
    data and the specification chart's lines)."""
    from qualplan.planning import documents
    from qualplan.reports import charts

    level_id = notched_level(factory, world)
    with unit_of_work(factory) as session:
        res = levels.read_level(session, levels.level_by_id(session, level_id)).result
        level_f, level_v = list(res.freq_hz), list(res.values)
        stored_n = notching.level_notching(session, level_id)
        stored_f = transfers.level_force_limit(session, level_id)
        content = documents.specification_content(session, world.product_id, "qualification",
                                                  level_ids=[level_id], preview=True)
        (section,) = content.sections
    assert stored_n.notches and stored_f.notches, "the inputs must give notches"
    html = browserless(users["viewer"]).get(f"/levels/{level_id}").text
    data = _plot_data(html, "level")
    notched = [x for x in data["series"] if x["role"] == "notched"]
    assert [x["name"] for x in notched] == [
        "notched input (response limit at monitor A3)",
        "input notched by the force limit (C² = 2, f0 = 180 Hz)"]
    assert notched[0]["x"] == stored_n.freq_hz and notched[0]["y"] == stored_n.notched
    assert notched[1]["x"] == stored_f.notched_freq_hz
    assert notched[1]["y"] == stored_f.notched_asd_g2_hz
    # the unnotched level is drawn too: the level's own breakpoints
    main = next(x for x in data["series"] if x["role"] == "main")
    assert main["x"] == level_f and main["y"] == level_v
    # the specification's chart draws the same stored points
    fig = charts.level_figure(section)
    lines = {ln.get_label(): ln for ln in fig.axes[0].get_lines()}
    ln = lines["notched input (response limit at monitor A3)"]
    assert list(ln.get_xdata()) == stored_n.freq_hz and list(ln.get_ydata()) == stored_n.notched
    ln = lines["input notched by the force limit (f0 = 180 Hz)"]
    assert list(ln.get_xdata()) == stored_f.notched_freq_hz
    assert list(ln.get_ydata()) == stored_f.notched_asd_g2_hz
    # both drawn below the level where they notch (a notch lowers the input)
    assert min(stored_n.notched) < min(stored_n.original)
