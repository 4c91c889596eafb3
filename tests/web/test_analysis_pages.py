"""A product's analysis page: modal summary upload (a revision), an estimate made from a
form and its own page, the loads package preview; a level's page shows its response-limit
notching."""

from __future__ import annotations

from qualplan.planning import environments, levels, notching, policies
from qualplan.planning import modal as pm
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.web.conftest import SETUP

MODES = (b"mode,fn_hz,zeta,meff_x_kg,meff_y_kg,meff_z_kg\n"
         b"1,180,0.05,0.1,0.2,1.5\n2,600,0.05,0.05,0.9,0.4\n")


def _shock_level(factory, world):
    with unit_of_work(factory) as session:
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, name="landing", kind=m.EnvironmentKind.shock,
            axis=m.Axis.Z, data={"freq_hz": [100.0, 1000.0, 2000.0],
                                  "accel_g": [10.0, 100.0, 100.0], "q": 10.0}))
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        lv = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="landing loads", purpose=m.LevelPurpose.analysis,
            kind="shock", axis=m.Axis.Z, revision_ids=[env.revisions[-1].id],
            policy_id=gevs.id))
        return lv.id


def test_upload_estimate_and_read_back(browserless, users, world, factory):
    level_id = _shock_level(factory, world)
    b = browserless(users["engineer"])
    page = b.get(f"/products/{world.product_id}/analysis").text
    assert "No modal summary yet." in page and "landing loads #1" in page
    # a refused file: the page says why, nothing is stored
    r = b.post(f"/products/{world.product_id}/modal-summaries", {"name": "FEM"},
               files={"file": ("modes.csv", b"mode,fn_hz\n1,-5\n", "text/csv")})
    assert r.status_code == 422 and "Not saved." in r.text
    with unit_of_work(factory) as session:
        assert pm.list_summaries(session, world.product_id) == []
    r = b.post(f"/products/{world.product_id}/modal-summaries",
               {"name": "FEM", "source": "unit FE model (invented)"},
               files={"file": ("modes.csv", MODES, "text/csv")}, follow_redirects=True)
    assert r.status_code == 200
    assert "FEM · revision 1" in r.text and "1.9 kg (79.2 %)" in r.text  # (1.5 + 0.4) / 2.4 kg
    with unit_of_work(factory) as session:
        (sm,) = pm.list_summaries(session, world.product_id)
        rev_id = pm.summary_revision(session, sm.id).id
    r = b.post(f"/products/{world.product_id}/estimates",
               {"modal_revision_id": str(rev_id), "level_id": str(level_id)},
               follow_redirects=True)
    assert r.status_code == 200 and "Estimate #" in r.text
    assert "base_force_cqc_n" in r.text and "N peak" in r.text and "SRS at fn [g]" in r.text
    viewer = browserless(users["viewer"])
    page = viewer.get(f"/products/{world.product_id}/analysis").text
    assert "landing loads #1" in page and "current" in page
    assert "Upload a modal summary" not in page  # a viewer sees no forms
    pdf = viewer.get(f"/products/{world.product_id}/loads.pdf")
    assert pdf.status_code == 200 and pdf.content.startswith(b"%PDF")


def test_level_page_shows_its_notching(browserless, users, world, factory):
    with unit_of_work(factory) as session:
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, name="tones", kind=m.EnvironmentKind.sine,
            axis=m.Axis.X, data={"bands": [{"f_lo_hz": 10.0, "f_hi_hz": 200.0,
                                            "quantity": "acceleration", "amplitude": 1.0}],
                                 "sweep": {"rate_oct_per_min": 2.0, "sweeps": 1}}))
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        lv = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="sine X", kind="sine", axis=m.Axis.X,
            revision_ids=[env.revisions[-1].id], policy_id=gevs.id))
        notching.set_notching(session, SETUP, lv.id, notching.NotchingIn(
            location="monitor on the lid", limit=3.0,
            transmissibility_freq_hz=[5.0, 100.0, 150.0, 300.0],
            transmissibility_gain=[1.0, 1.5, 10.0, 1.0],
            transmissibility_source="low-level survey", max_notch_db=3.0))
        level_id = lv.id
    html = browserless(users["viewer"]).get(f"/levels/{level_id}").text
    assert "Notched against a response limit" in html and "monitor on the lid" in html
    assert "approver&#39;s acceptance needed" in html or "approver's acceptance needed" in html
