"""Set-based staleness of many levels (levels.staleness_of_levels, what the audit and the
readiness read) against the per-level one (levels.staleness), on a program where levels
go stale for every reason the per-level check knows; and the audit's statuses against
the per-requirement status with the per-level staleness."""

from __future__ import annotations

import gc

from qualplan.planning import (
    approvals,
    audit,
    catalog,
    environments,
    evidence,
    levels,
    policies,
    readiness,
    requirements,
    transfers,
)
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store import scope

# Flat random profiles; the values only need to differ (common practice for a test of
# bookkeeping, no numeric check here).
RANDOM = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01], "duration_s": 120.0}


def _env(session, actor, product, phase, name, axis, asd=0.01):
    return environments.create_environment(session, actor, s.EnvironmentCreate(
        product_id=product.id, phase_id=phase.id, name=name, kind=m.EnvironmentKind.random,
        axis=m.Axis(axis), data={**RANDOM, "asd_g2_hz": [asd, asd]}))


def _revise(session, actor, env, asd):
    environments.revise_environment(session, actor, env.id, s.RevisionIn(
        data={**RANDOM, "asd_g2_hz": [asd, asd]}, note="new survey"))


def _level(session, actor, product, name, axis, revs, policy, purpose=m.LevelPurpose.test):
    return levels.derive_level(session, actor, s.LevelRecipe(
        product_id=product.id, name=name, kind="random", axis=m.Axis(axis), purpose=purpose,
        revision_ids=[r.id for r in revs], policy_id=policy.id))


def _stale_program(session, engineer, program, road):
    """A pod and its computer, levels of both; then every cause of staleness."""
    pod = catalog.create_product(session, engineer, s.ProductCreate(
        program_id=program.id, name="Sensor pod", mass_kg=45.0))
    unit = catalog.create_product(session, engineer, s.ProductCreate(
        program_id=program.id, name="Pod computer", parent_id=pod.id, mass_kg=8.0))
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    mine = policies.copy_policy(session, engineer, gevs.id, s.PolicyCopy(name="pod policy"))
    pod_x = _env(session, engineer, pod, road, "road X", "X", 0.01)
    pod_z = _env(session, engineer, pod, road, "road Z", "Z", 0.04)
    pod_all = _env(session, engineer, pod, road, "handling", "all", 0.002)
    unit_z = _env(session, engineer, unit, road, "shelf Z", "Z", 0.02)
    unit_y = _env(session, engineer, unit, road, "shelf Y", "Y", 0.02)
    zone = transfers.create_rule(session, engineer, transfers.RuleCreate(
        program_id=program.id, name="pod shelf zone", kind="zone_transmissibility",
        spec={"freq_hz": [20.0, 200.0, 2000.0], "gain": [1.0, 4.0, 1.0]}, basis="test",
        provenance="low-level survey of the pod shelf, invented for the test"))
    moved = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="road X (shelf)", axis=m.Axis.X,
        parent_environment_ids=[pod_x.id], rule_ids=[zone.id]))
    last = {e.id: e.revisions[-1] for e in (pod_x, pod_z, pod_all, unit_z, unit_y)}
    made = {
        # inputs from the parent and the child; life cycle of the unit's Z axis
        "unit Z": _level(session, engineer, unit, "random Z", "Z",
                         [last[pod_z.id], last[unit_z.id]], gevs),
        "unit Y": _level(session, engineer, unit, "random Y", "Y", [last[unit_y.id]], gevs),
        "unit X": _level(session, engineer, unit, "random X", "X", [moved], gevs),
        "pod X": _level(session, engineer, pod, "random X", "X", [last[pod_x.id]], gevs),
        "pod Z": _level(session, engineer, pod, "random Z", "Z", [last[pod_z.id]], mine),
        "pod all": _level(session, engineer, pod, "random all", "all",
                          [last[pod_all.id]], gevs, m.LevelPurpose.analysis),
        "unit Y spare": _level(session, engineer, unit, "random Y spare", "Y",
                               [last[unit_y.id]], gevs),
        "current": _level(session, engineer, unit, "analysis Y", "Y", [last[unit_y.id]],
                          gevs, m.LevelPurpose.analysis),
    }
    assert all(levels.staleness(session, lv) == [] for lv in made.values())
    # a revised input (and with it a stale transferred environment: the transfer's rule)
    _revise(session, engineer, pod_z, 0.05)
    transfers.revise_rule(session, engineer, zone.id, transfers.RuleRevisionIn(
        spec={"freq_hz": [20.0, 200.0, 2000.0], "gain": [1.0, 3.0, 1.0]}, basis="analysis",
        note="finite-element zone response"))
    # a withdrawn environment of the life cycle, a new one that joined it
    approvals.withdraw_environment(session, engineer, pod_all.id,
                                   "handling profile replaced by the customer's issue C")
    _env(session, engineer, unit, road, "shelf Z late", "Z", 0.03)
    # a superseded level, a withdrawn level, a policy whose rules changed
    _revise(session, engineer, pod_x, 0.02)
    levels.rederive_level(session, engineer, made["pod X"].id)
    approvals.withdraw_level(session, engineer, made["unit Y spare"].id,
                             "spare profile not needed any more")
    rules = policies.rules_of(mine)
    rules.random[m.Grade.qualification] = rules.random[m.Grade.qualification].model_copy(
        update={"margin_db": 1.0})
    policies.update_policy(session, engineer, mine.id, s.PolicyUpdate(rules=rules), None)
    return pod, unit, made


def test_set_based_staleness_equals_the_per_level_one(session, engineer, program, road):
    pod, unit, made = _stale_program(session, engineer, program, road)
    every = levels.list_levels(session, pod.id) + levels.list_levels(session, unit.id)
    per_level = {lv.id: levels.staleness(session, lv) for lv in every}
    assert levels.staleness_of_levels(session, every) == per_level
    # a subset, in another order, reads the same
    some = [made["unit X"], made["pod Z"]]
    assert levels.staleness_of_levels(session, some) == {lv.id: per_level[lv.id] for lv in some}
    assert levels.staleness_of_levels(session, []) == {}
    # a session scoped to the caller's programs (what the API and the web use) reads the same
    scope.limit_to_programs(session, [program.id])
    try:
        assert levels.staleness_of_levels(session, every) == per_level
        assert {lv.id: levels.staleness(session, lv) for lv in every} == per_level
    finally:
        scope.clear(session)
    # every cause is in the scenario (so the comparison covers each), and a current level
    text = {name: " | ".join(per_level[lv.id]) for name, lv in made.items()}
    assert "'road Z' has revision 2, the level used revision 1" in text["unit Z"]
    assert "'handling' was withdrawn by eve" in text["unit Z"]
    assert "'shelf Z late' joined the life cycle" in text["unit Z"]
    assert "transfer rule 'pod shelf zone' has revision 2" in text["unit X"]
    assert "superseded by random X #2" in text["pod X"]
    assert "'road X' has revision 2" in text["pod X"]
    assert text["unit Y spare"].startswith("the level was withdrawn by eve")
    assert "margin policy's rules changed" in text["pod Z"]
    # an analysis level does not depend on the life cycle, only on its inputs
    assert "joined" not in text["pod all"] and "'handling' was withdrawn" in text["pod all"]
    assert "'handling' was withdrawn" in text["unit Y"]  # an "all" axis environment
    assert "parent environment 'road X' has revision 2" in text["unit X"]
    assert per_level[made["current"].id] == []


def test_audit_and_readiness_equal_the_per_level_statuses(session, engineer, program, road):
    pod, unit, made = _stale_program(session, engineer, program, road)
    reqs = []
    for i, (name, lv) in enumerate(sorted(made.items())):
        # evidence made now carries the level's hash: only the level's staleness decides
        r = requirements.create_requirement(session, engineer, s.RequirementCreate(
            program_id=program.id, key=f"REQ-{i:02d}", text=f"survives {name}",
            product_id=lv.product_id, level_id=lv.id, method="inspection"))
        evidence.add_inspection(session, engineer, r.id, s.InspectionEvidenceIn(
            passed=True, note="looked"))
        reqs.append(r)
    open_req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=program.id, key="REQ-99", text="no evidence yet", product_id=unit.id,
        method="analysis"))
    report = audit.audit(session, program.id)
    scope.limit_to_programs(session, [program.id])
    try:  # the same audit in a session scoped to the program (the API's, the web's)
        assert audit.audit(session, program.id, now=report.generated_at) == report
    finally:
        scope.clear(session)
    by_key = {i.key: i for i in report.items}
    for r in [*reqs, open_req]:
        st = requirements.status_of(session, r)  # no cache: levels.staleness per level
        assert (by_key[r.key].status, by_key[r.key].reason) == (st.status, st.reason)
    statuses = [by_key[r.key].status for r in reqs]
    assert statuses.count("stale") == len(made) - 1 and statuses.count("verified") == 1
    assert by_key["REQ-99"].status == "open"
    # the readiness lists the stale levels with the per-level reasons
    ready = readiness.program_readiness(session, program.id)
    every = levels.list_levels(session, pod.id) + levels.list_levels(session, unit.id)
    expected = sorted((lv.id, levels.staleness(session, lv)) for lv in every
                      if levels.staleness(session, lv))
    assert sorted((x.level_id, x.reasons) for x in ready.stale_levels) == expected


def test_the_audits_collector_pause_nests_and_restores():
    """The audit pauses Python's cyclic collector (audit.cycle_collection_paused): nested
    pauses end with the outermost, and a collector that was off stays off (Python's gc
    module documentation: gc.disable, gc.isenabled)."""
    was = gc.isenabled()
    gc.enable()
    try:
        with audit.cycle_collection_paused():
            assert not gc.isenabled()
            with audit.cycle_collection_paused():
                assert not gc.isenabled()
            assert not gc.isenabled()
        assert gc.isenabled()
        gc.disable()
        with audit.cycle_collection_paused():
            pass
        assert not gc.isenabled()
    finally:
        if was:
            gc.enable()
