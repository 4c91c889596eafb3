"""The audit page shows the margins by cause; an environment's change impact has its
page (issue 13 items 1 and 7)."""

from __future__ import annotations

from qualplan.planning import environments, levels, margins, policies, requirements
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.web.conftest import SETUP

# Invented flight spectrum.
FLIGHT_Z = {"freq_hz": [20.0, 80.0, 350.0, 2000.0], "asd_g2_hz": [0.002, 0.01, 0.01, 0.001]}


def test_audit_page_margins_and_impact_page(browserless, users, world, factory):
    with unit_of_work(factory) as session:
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, phase_id=world.phase_id, name="flight Z",
            kind=m.EnvironmentKind.random, axis=m.Axis.Z, data=FLIGHT_Z))
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        level = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="random Z", kind="random", axis=m.Axis.Z,
            grade=m.Grade.acceptance, revision_ids=[env.revisions[-1].id],
            policy_id=gevs.id))
        requirements.create_requirement(session, SETUP, s.RequirementCreate(
            program_id=world.program_id, key="VIB-Z", text="random Z",
            product_id=world.product_id, level_id=level.id, method=m.VerificationMethod.test))
        env_id, level_id = env.id, level.id
    b = browserless(users["viewer"])
    html = b.get(f"/programs/{world.program_id}/audit").text
    assert "Margins by cause" in html
    for header in margins.COLUMNS:
        assert header in html
    csv = b.get(f"/programs/{world.program_id}/audit.csv").text
    lines = csv.splitlines()
    assert lines[0].startswith("# margin-closure audit of program")
    header = next(x for x in lines if not x.startswith("#"))  # the one export format
    assert "time compression [dB, not a margin]" in header
    page = b.get(f"/environments/{env_id}").text
    assert f'href="/environments/{env_id}/impact"' in page
    r = b.get(f"/environments/{env_id}/impact")
    assert r.status_code == 200
    assert f'href="/levels/{level_id}"' in r.text and "would become stale" in r.text
    assert "VIB-Z" in r.text
    assert b.get("/environments/999999/impact").status_code == 404
