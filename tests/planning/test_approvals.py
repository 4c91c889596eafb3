"""Withdrawal, re-derivation, default baselines, waivers under the two-person rule and
the sign-off of issued documents (planning.approvals, planning.levels,
planning.documents)."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest
from sqlalchemy import select

from qualplan.planning import (
    approvals,
    audit,
    catalog,
    documents,
    environments,
    evidence,
    levels,
    lifecycle,
    policies,
    requirements,
)
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import Conflict, PermissionDenied, ValidationFailed
from qualplan.store import models as m

# Invented environments: flat enough and high enough that the workmanship floor of the
# shipped policy never binds, so a level scales exactly with its input.
ROAD_Z = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.2, 0.2]}
FLIGHT_Z = {"freq_hz": [20.0, 100.0, 1000.0, 2000.0], "asd_g2_hz": [0.1, 0.3, 0.3, 0.1]}


class NoFiles:
    """Renders nothing (these tests read the database; tests/reports read the PDFs)."""

    def render(self, content, out_dir: Path) -> list[Path]:
        return []


def _env(session, actor, unit, phase, name, data):
    return environments.create_environment(session, actor, s.EnvironmentCreate(
        product_id=unit.id, phase_id=phase.id, name=name, kind=m.EnvironmentKind.random,
        axis=m.Axis.Z, data=data))


def _level(session, actor, unit, envs, grade=m.Grade.qualification, name="random Z"):
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    return levels.derive_level(session, actor, s.LevelRecipe(
        product_id=unit.id, name=name, grade=grade, kind="random", axis=m.Axis.Z,
        revision_ids=[e.revisions[-1].id for e in envs], policy_id=gevs.id))


@pytest.fixture
def two(session, engineer, unit, road):
    flight = catalog.create_phase(session, engineer, s.PhaseCreate(
        program_id=unit.program_id, name="survey flight", duration_s=1800.0, occurrences=10))
    road_env = _env(session, engineer, unit, road, "road Z", ROAD_Z)
    flight_env = _env(session, engineer, unit, flight, "flight Z", FLIGHT_Z)
    return road_env, flight_env


def _requirement(session, actor, unit, level, key="VIB-001"):
    return requirements.create_requirement(session, actor, s.RequirementCreate(
        program_id=unit.program_id, key=key, text="Random vibration, Z", product_id=unit.id,
        level_id=level.id, method=m.VerificationMethod.test))


def _inspection(session, actor, req):
    return evidence.add_inspection(session, actor, req.id, s.InspectionEvidenceIn(
        passed=False, note="connector damaged"))


# --- withdrawal -----------------------------------------------------------------------------


def test_a_withdrawn_environment_leaves_the_life_cycle_and_makes_its_levels_stale(
        session, engineer, viewer, unit, two):
    road_env, flight_env = two
    level = _level(session, engineer, unit, [road_env])  # flight Z is in its life cycle
    req = _requirement(session, engineer, unit, level)
    _inspection(session, engineer, req)
    assert not levels.staleness(session, level)

    with pytest.raises(PermissionDenied):
        approvals.withdraw_environment(session, viewer, flight_env.id, "superseded by test")
    with pytest.raises(ValidationFailed, match="reason"):
        approvals.withdraw_environment(session, engineer, flight_env.id, "  ")
    approvals.withdraw_environment(session, engineer, flight_env.id,
                                   "flight profile replaced by the customer's issue C")
    with pytest.raises(Conflict, match="withdrawn by eve"):
        approvals.withdraw_environment(session, engineer, flight_env.id, "once more, again")

    life = lifecycle.life_cycle(session, unit, m.Axis.Z)
    assert [x.environment.name for x in life] == ["road Z"]
    reasons = levels.staleness(session, level)
    assert any("'flight Z' was withdrawn by eve" in r and "issue C" in r for r in reasons)
    st = requirements.status_of(session, req)
    assert st.status == "stale" and "withdrawn" in st.reason
    # out of the derivations: a withdrawn environment's revision is refused as an input
    with pytest.raises(ValidationFailed, match="revision_ids\\[0\\].*withdrawn"):
        _level(session, engineer, unit, [flight_env], name="flight only")
    # still in history: the environment reads as withdrawn, with the event in the log
    read = environments.read_environment(session, flight_env)
    assert read.withdrawn.startswith("withdrawn by eve") and "issue C" in read.withdrawn
    with pytest.raises(Conflict, match="not revised"):
        environments.revise_environment(session, engineer, flight_env.id,
                                        s.RevisionIn(data=FLIGHT_Z, note="again"))
    # the database is shared by the run (API tests commit theirs): read this test's event
    ev = session.scalars(select(m.Event).where(m.Event.action == "withdraw",
                                               m.Event.entity_id == flight_env.id,
                                               m.Event.entity == "environment")).one()
    assert ev.detail["reason"].endswith("issue C")


def test_a_withdrawn_level_leaves_the_default_baseline(session, engineer, unit, two):
    road_env, flight_env = two
    a = _level(session, engineer, unit, [road_env, flight_env], name="random Z")
    b = _level(session, engineer, unit, [road_env, flight_env], name="random Z spare")
    base = documents.default_baseline(session, unit.id, "qualification")
    assert [(x.level_id, x.taken) for x in base] == [(a.id, True), (b.id, True)]
    approvals.withdraw_level(session, engineer, b.id, "spare profile not needed any more")
    assert [x.id for x in lifecycle.current_test_levels(session, unit.id, "qualification")] \
        == [a.id]
    content = documents.specification_content(session, unit.id, "qualification")
    assert [sec.level_id for sec in content.sections] == [a.id]
    read = levels.read_level(session, b)
    assert read.withdrawn.startswith("withdrawn by eve") and read.stale
    with pytest.raises(ValidationFailed, match="may not be issued: the level was withdrawn"):
        documents.specification_content(session, unit.id, "qualification", level_ids=[b.id])


# --- re-derivation --------------------------------------------------------------------------


def test_rederive_shows_the_difference_in_db_then_supersedes(session, engineer, unit, two):
    road_env, flight_env = two
    level = _level(session, engineer, unit, [road_env, flight_env])
    with pytest.raises(Conflict, match="changes nothing"):
        levels.rederive_level(session, engineer, level.id)
    # the flight environment doubles (ASD x 2, everywhere above the road one)
    environments.revise_environment(session, engineer, flight_env.id, s.RevisionIn(
        data={"freq_hz": FLIGHT_Z["freq_hz"], "asd_g2_hz": [2 * a for a in
                                                             FLIGHT_Z["asd_g2_hz"]]},
        note="new flight data"))
    preview = levels.rederive_level(session, engineer, level.id, store=False)
    assert not preview.stored and preview.new_level_id is None
    assert levels.list_levels(session, unit.id) == [level]  # nothing stored
    assert [(c.environment, c.old_revision, c.new_revision) for c in preview.inputs] == [
        ("flight Z", 1, 2)]
    # Closed form: where the flight environment governs, ASD x 2 is 10 log10 2 = +3.0103 dB
    # at the breakpoint; where the road one still governs, 0 dB.
    by_f = {row.freq_hz: row.db for row in preview.rows}
    assert by_f[100.0] == pytest.approx(10 * math.log10(2), abs=1e-9)
    assert by_f[1000.0] == pytest.approx(10 * math.log10(2), abs=1e-9)
    assert preview.unit == "g^2/Hz" and preview.overall_unit == "g rms"
    assert 0 < preview.overall_db < 10 * math.log10(2)
    # overall = 20 log10 of the g rms ratio (g rms from the stored results)
    stored = levels.rederive_level(session, engineer, level.id)
    assert stored.stored and stored.rows == preview.rows
    new_read = levels.read_level(session, levels.level_by_id(session, stored.new_level_id))
    old_read = levels.read_level(session, level)
    assert stored.overall_db == pytest.approx(
        20 * math.log10(new_read.result.grms / old_read.result.grms), rel=1e-12)
    assert new_read.number == level.number + 1 and not new_read.stale
    assert old_read.superseded_by_id == new_read.id
    assert any(r.startswith(f"superseded by random Z #{new_read.number}")
               for r in old_read.stale_reasons)
    with pytest.raises(Conflict, match="superseded already"):
        levels.rederive_level(session, engineer, level.id)
    ev = session.scalars(select(m.Event).where(m.Event.action == "supersede",
                                               m.Event.entity == "level",
                                               m.Event.entity_id == level.id)).one()
    assert ev.detail["new_level"] == new_read.id


def test_rederive_of_a_level_whose_input_was_withdrawn_is_refused(session, engineer, unit, two):
    road_env, flight_env = two
    level = _level(session, engineer, unit, [road_env, flight_env])
    approvals.withdraw_environment(session, engineer, flight_env.id, "measured in error")
    with pytest.raises(ValidationFailed, match="withdrawn"):
        levels.rederive_level(session, engineer, level.id, store=False)


# --- waivers --------------------------------------------------------------------------------


def _later(days: float) -> datetime:
    return datetime.now(UTC) + timedelta(days=days)


def test_a_waiver_by_the_evidence_author_is_refused_under_the_two_person_rule(
        session, engineer, approver, unit, two):
    level = _level(session, engineer, unit, [two[0]])
    req = _requirement(session, engineer, unit, level)
    _inspection(session, engineer, req)
    eve_approver = Actor("eve", m.Role.approver)  # the evidence's author, now an approver
    cmd = s.WaiverIn(rationale="accepted by the review board", expires_at=_later(30))
    with pytest.raises(PermissionDenied, match="eve recorded evidence"):
        requirements.waive(session, eve_approver, req.id, cmd)
    w = requirements.waive(session, approver, req.id, cmd)
    assert w.approver == "alan" and not w.without_evidence


def test_the_requester_may_not_approve_the_waiver(session, engineer, approver, unit, two):
    level = _level(session, engineer, unit, [two[0]])
    req = _requirement(session, engineer, unit, level)
    _inspection(session, engineer, req)
    asked = approvals.request_waiver(session, approver, req.id, s.WaiverRequestIn(
        reason="damage is cosmetic, see report 12"))
    cmd = s.WaiverIn(rationale="accepted by the review board", expires_at=_later(30))
    with pytest.raises(PermissionDenied, match="alan requested this waiver"):
        requirements.waive(session, approver, req.id, cmd)
    w = requirements.waive(session, Actor("ann", m.Role.approver), req.id, cmd)
    assert w.request_id == asked.id


def test_acceptance_asks_one_person_by_default(session, engineer, unit, two):
    level = _level(session, engineer, unit, [two[0]], grade=m.Grade.acceptance)
    req = _requirement(session, engineer, unit, level)
    _inspection(session, engineer, req)
    w = requirements.waive(session, Actor("eve", m.Role.approver), req.id, s.WaiverIn(
        rationale="workmanship screen repeated", expires_at=_later(30)))
    assert requirements.status_of(session, req).waiver.id == w.id


def test_waiver_expiry_is_bounded_by_the_policy(session, engineer, approver, unit, two):
    level = _level(session, engineer, unit, [two[0]])
    req = _requirement(session, engineer, unit, level)
    _inspection(session, engineer, req)
    with pytest.raises(ValidationFailed, match="expires_at.*within 365 days"):
        requirements.waive(session, approver, req.id, s.WaiverIn(
            rationale="accepted by the review board", expires_at=_later(366)))
    with pytest.raises(ValidationFailed, match="rationale"):
        requirements.waive(session, approver, req.id, s.WaiverIn(
            rationale="          .", expires_at=_later(30)))
    requirements.waive(session, approver, req.id, s.WaiverIn(
        rationale="accepted by the review board", expires_at=_later(364)))


def test_waiving_without_evidence_needs_an_admin_and_the_audit_says_so(
        session, engineer, approver, unit, two):
    level = _level(session, engineer, unit, [two[0]])
    req = _requirement(session, engineer, unit, level)
    cmd = s.WaiverIn(rationale="test deferred to the system level", expires_at=_later(30))
    with pytest.raises(PermissionDenied, match="no evidence at all.*admin"):
        requirements.waive(session, approver, req.id, cmd)
    w = requirements.waive(session, Actor("ada", m.Role.admin), req.id, cmd)
    assert w.without_evidence
    item = audit.audit(session, unit.program_id).items[0]
    assert item.status == "waived" and "WITHOUT ANY EVIDENCE" in item.reason


# --- sign-off -------------------------------------------------------------------------------


def test_sign_off_by_three_distinct_users(session, engineer, approver, unit, two, tmp_path):
    _level(session, engineer, unit, [two[0], two[1]])
    content = documents.specification_content(session, unit.id, "qualification")
    assert [(a.role, a.name) for a in content.approvals] == [
        ("prepared", None), ("checked", None), ("approved", None)]
    issued = documents.issue_document(session, engineer, content, NoFiles(), tmp_path)
    doc_id = issued.document_id
    approvals.sign_document(session, engineer, doc_id, "prepared")
    with pytest.raises(Conflict, match="eve signed .* as prepared already"):
        approvals.sign_document(session, engineer, doc_id, "checked")
    with pytest.raises(Conflict, match="approved after it is checked"):
        approvals.sign_document(session, approver, doc_id, "approved")
    with pytest.raises(PermissionDenied):
        approvals.sign_document(session, Actor("vic", m.Role.viewer), doc_id, "checked")
    approvals.sign_document(session, Actor("carl", m.Role.engineer), doc_id, "checked")
    with pytest.raises(PermissionDenied, match="approver"):
        approvals.sign_document(session, Actor("dora", m.Role.engineer), doc_id, "approved")
    approvals.sign_document(session, approver, doc_id, "approved")
    with pytest.raises(Conflict, match="signed as approved already, by alan"):
        approvals.sign_document(session, Actor("ann", m.Role.approver), doc_id, "approved")
    with pytest.raises(ValidationFailed, match="role"):
        approvals.sign_document(session, approver, doc_id, "reviewed")
    again = documents.specification_content(session, unit.id, "qualification")
    assert again.revision == issued.revision and again.content_hash() == content.content_hash()
    signed = [(a.role, a.name) for a in again.approvals]
    assert signed == [("prepared", "eve"), ("checked", "carl"), ("approved", "alan")]
    assert all(a.signed_at is not None for a in again.approvals)
    events = session.scalars(select(m.Event).where(
        m.Event.action == "sign", m.Event.entity == "document",
        m.Event.entity_id == doc_id).order_by(m.Event.id)).all()
    assert [e.detail["role"] for e in events] == ["prepared", "checked", "approved"]
