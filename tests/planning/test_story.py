"""A full story through the use cases: environments -> levels with coverage ->
requirements -> evidence -> audit, and the stale path."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from qualplan.dynamics import psd
from qualplan.planning import audit, environments, evidence, levels, policies, requirements
from qualplan.planning import schemas as s
from qualplan.planning.errors import PermissionDenied, ValidationFailed
from qualplan.store import models as m

# Invented environments of the demo scenario (a survey drone's camera electronics).
ROAD_Z = {"freq_hz": [10.0, 40.0, 500.0], "asd_g2_hz": [0.015, 0.015, 0.00015]}
FLIGHT_Z = {"freq_hz": [20.0, 80.0, 350.0, 2000.0], "asd_g2_hz": [0.002, 0.01, 0.01, 0.001]}


def _lines(result) -> np.ndarray:
    f = result["freq_hz"]
    return np.geomspace(f[0], f[-1], int(48 * np.log2(f[-1] / f[0])) + 1)


def _env(session, actor, unit, phase, name, kind, data, axis=m.Axis.Z):
    return environments.create_environment(session, actor, s.EnvironmentCreate(
        product_id=unit.id, phase_id=phase.id, name=name, kind=kind, axis=axis, data=data))


def _random_level(session, actor, unit, revs, grade=m.Grade.qualification, name="random Z"):
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    return levels.derive_level(session, actor, s.LevelRecipe(
        product_id=unit.id, name=name, grade=grade, kind="random", axis=m.Axis.Z,
        revision_ids=[r.id for r in revs], policy_id=gevs.id))


@pytest.fixture
def story(session, engineer, program, unit, road):
    from qualplan.planning import catalog

    flight = catalog.create_phase(session, engineer, s.PhaseCreate(
        program_id=program.id, name="survey flight", duration_s=1800.0, occurrences=100))
    road_env = _env(session, engineer, unit, road, "road Z", m.EnvironmentKind.random, ROAD_Z)
    flight_env = _env(session, engineer, unit, flight, "flight Z", m.EnvironmentKind.random,
                      FLIGHT_Z)
    return {"flight": flight, "road_env": road_env, "flight_env": flight_env}


def test_random_level_margin_duration_floor_and_coverage(session, engineer, unit, story):
    revs = [story["road_env"].revisions[-1], story["flight_env"].revisions[-1]]
    level = _random_level(session, engineer, unit, revs)
    r = level.result
    # GEVS qualification: limit + 3 dB, 120 s per axis, never below workmanship + 3 dB
    # (GSFC-STD-7000B Table 2.4-1, from memory); the floor's overall level is 9.59 g rms
    # (NASA-STD-7001B workmanship 6.78 g rms x sqrt(2), closed form).
    assert r["duration_s"] == 120.0
    assert r["grms"] >= 6.7842 * math.sqrt(2) * (1 - 1e-9)
    assert [st["step"] for st in r["steps"]][:2] == ["maximum envelope",
                                                     "conservative simplification"]
    cov = r["coverage"]
    assert cov["fn_hz"] and set(cov["by_b"]) == {"4", "6.4", "8", "12"}
    assert isinstance(cov["passed"], bool)
    assert sorted(level.input_hashes["revisions"]) == sorted(str(x.id) for x in revs)
    assert not levels.read_level(session, level).stale


def test_requirement_verified_then_stale_after_new_revision(session, engineer, unit, story):
    revs = [story["road_env"].revisions[-1], story["flight_env"].revisions[-1]]
    # An acceptance level: a workmanship screen, so its coverage of the 50 h life is not
    # asked (a qualification level must cover it: tests/planning/test_margins.py).
    level = _random_level(session, engineer, unit, revs, grade=m.Grade.acceptance)
    req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=unit.program_id, key="ENV-001", text="Survive qualification random, Z",
        product_id=unit.id, level_id=level.id, method=m.VerificationMethod.test))
    assert requirements.status_of(session, req).status == "open"
    r = level.result
    # The achieved control spectrum equals the demand, on 1/48-octave controller lines.
    lines = _lines(r)
    ev = evidence.add_test_record(session, engineer, req.id, s.TestEvidenceIn(
        freq_hz=lines.tolist(), values=psd.asd_at(r["freq_hz"], r["asd_g2_hz"], lines).tolist(),
        duration_s=r["duration_s"]))
    assert ev.verdict is m.Verdict.passed, ev.summary["reason"]
    report = audit.audit(session, unit.program_id)
    assert report.release_ready and report.counts["verified"] == 1

    environments.revise_environment(session, engineer, story["flight_env"].id, s.RevisionIn(
        data={**FLIGHT_Z, "asd_g2_hz": [0.003, 0.015, 0.015, 0.0015]}, note="new flight data"))
    st = requirements.status_of(session, req)
    assert st.status == "stale" and "flight Z" in st.reason
    report = audit.audit(session, unit.program_id)
    assert not report.release_ready and report.counts["stale"] == 1


def test_failing_test_record_and_waiver(session, engineer, approver, unit, story):
    level = _random_level(session, engineer, unit, [story["road_env"].revisions[-1]])
    req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=unit.program_id, key="ENV-002", text="Random Z", product_id=unit.id,
        level_id=level.id, method=m.VerificationMethod.test))
    r = level.result
    lines = _lines(r)
    low = psd.asd_at(r["freq_hz"], r["asd_g2_hz"], lines) * 10 ** (-4.0 / 10)  # outside -3 dB
    ev = evidence.add_test_record(session, engineer, req.id, s.TestEvidenceIn(
        freq_hz=lines.tolist(), values=low.tolist(), duration_s=r["duration_s"]))
    assert ev.verdict is m.Verdict.failed
    assert "outside ±3 dB" in ev.summary["reason"]
    assert requirements.status_of(session, req).status == "failed"
    with pytest.raises(PermissionDenied):
        requirements.waive(session, engineer, req.id, s.WaiverIn(
            rationale="accepted by the customer board", expires_at=datetime.now(UTC)))
    requirements.waive(session, approver, req.id, s.WaiverIn(
        rationale="accepted by the customer board",
        expires_at=datetime.now(UTC) + timedelta(days=10)))
    assert requirements.status_of(session, req).status == "waived"
    later = datetime.now(UTC) + timedelta(days=11)
    assert requirements.status_of(session, req, now=later).status == "failed"


def test_analysis_evidence_margin_of_safety(session, engineer, unit):
    req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=unit.program_id, key="STR-001", text="Bracket stress", product_id=unit.id,
        method=m.VerificationMethod.analysis, required_margin=0.0))
    # MS = allowable / (FS x applied) - 1 = 276 / (1.25 x 180) - 1 = 0.2267 (closed form)
    ev = evidence.add_analysis(session, engineer, req.id, s.AnalysisEvidenceIn(
        applied=180.0, allowable=276.0, units="MPa", factor_of_safety=1.25))
    assert ev.achieved_margin == pytest.approx(276 / (1.25 * 180) - 1)
    assert requirements.status_of(session, req).status == "verified"
    ev = evidence.add_analysis(session, engineer, req.id, s.AnalysisEvidenceIn(
        applied=250.0, allowable=276.0, units="MPa", factor_of_safety=1.25))
    assert requirements.status_of(session, req).status == "failed"


def test_level_refuses_an_environment_of_another_axis(session, engineer, unit, story, road):
    x_env = _env(session, engineer, unit, road, "road X", m.EnvironmentKind.random, ROAD_Z,
                 axis=m.Axis.X)
    with pytest.raises(ValidationFailed, match="axis X"):
        _random_level(session, engineer, unit, [x_env.revisions[-1]])


def test_analysis_level_with_load_factor(session, engineer, unit, story):
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    level = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="loads Z", purpose=m.LevelPurpose.analysis, kind="random",
        axis=m.Axis.Z, revision_ids=[story["flight_env"].revisions[-1].id], policy_id=gevs.id,
        load_factor_fn_hz=150.0, load_factor_q=10.0))
    lf = level.result["load_factor"]
    # Miles beside: g rms = sqrt(pi/2 fn Q G(fn)) (Miles 1954); the load factor itself is
    # 3 sigma of the exact SDOF response (tests/planning/test_exposure.py checks it).
    assert lf["miles_grms"] == pytest.approx(math.sqrt(math.pi / 2 * 150 * 10 *
                                                       lf["asd_at_fn_g2_hz"]), rel=1e-9)
    assert lf["three_sigma_g"] == pytest.approx(3 * lf["exact_grms"], rel=1e-12)
    assert "approve" in lf["caution"]
    # Analysis margin +3 dB on the flight PSD: the 80-350 Hz plateau doubles (x1.995).
    assert lf["asd_at_fn_g2_hz"] == pytest.approx(0.01 * 10 ** 0.3, rel=1e-9)


def test_sine_and_shock_levels(session, engineer, unit, road):
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    # Displacement chosen so that the 15 Hz crossover is continuous: X = A g0 / (2 pi f)^2.
    x_pk_pk = 2 * 1.5 * 9.80665 / (2 * math.pi * 15.0) ** 2
    sine = _env(session, engineer, unit, road, "engine sine", m.EnvironmentKind.sine, {
        "bands": [{"f_lo_hz": 5.0, "f_hi_hz": 15.0, "quantity": "displacement",
                   "amplitude": x_pk_pk, "unit": "m", "measure": "peak_to_peak"},
                  {"f_lo_hz": 15.0, "f_hi_hz": 100.0, "quantity": "acceleration",
                   "amplitude": 1.5}],
        "sweep": {"rate_oct_per_min": 2.0, "direction": "up", "sweeps": 1}}, axis=m.Axis.Z)
    lvl = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="sine Z", kind="sine", axis=m.Axis.Z,
        revision_ids=[sine.revisions[-1].id], policy_id=gevs.id))
    # GEVS qualification sine: 1.25 x limit at 2 oct/min (from memory, see policies.py)
    assert lvl.result["peak_accel_g"] == pytest.approx(1.25 * 1.5)
    assert lvl.result["sweep_rate_oct_per_min"] == 2.0
    shock = _env(session, engineer, unit, road, "landing shock", m.EnvironmentKind.shock,
                 {"freq_hz": [100.0, 1000.0, 2000.0], "accel_g": [10.0, 100.0, 100.0],
                  "q": 10.0}, axis=m.Axis.Z)
    lvl = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="shock Z", kind="shock", axis=m.Axis.Z,
        revision_ids=[shock.revisions[-1].id], policy_id=gevs.id))
    # +3 dB on an SRS amplitude = x 1.4125 (20 log10)
    assert lvl.result["accel_g"][-1] == pytest.approx(100 * 10 ** (3 / 20))
    assert lvl.result["shocks_per_axis"] == 2
    assert "ers" in lvl.result["coverage"]


def test_requirement_update_refuses_null_for_a_required_field(session, engineer, unit):
    req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=unit.program_id, key="GAP-1", text="t", product_id=unit.id,
        method=m.VerificationMethod.test))
    with pytest.raises(ValidationFailed) as exc:
        requirements.update_requirement(session, engineer, req.id, s.RequirementUpdate(
            method=None, expected_version=req.version))
    assert exc.value.field == "method"


def test_requirement_page_counts_and_subtree(session, engineer, unit):
    from qualplan.planning import catalog

    child = catalog.create_product(session, engineer, s.ProductCreate(
        program_id=unit.program_id, parent_id=unit.id, name="power board"))
    for i, prod in enumerate([unit, child, child]):
        requirements.create_requirement(session, engineer, s.RequirementCreate(
            program_id=unit.program_id, key=f"PG-{i}", text="t", product_id=prod.id,
            method=m.VerificationMethod.inspection))
    ids = catalog.product_subtree_ids(session, unit.id)
    assert ids == [unit.id, child.id]
    items, total = requirements.requirement_page(session, product_ids=ids, offset=1, limit=1)
    assert total == 3 and [r.key for r in items] == ["PG-1"] and items[0].status == "open"


def test_program_coverage_adds_the_levels_of_an_axis(session, engineer, unit, story, road):
    """The whole Z sequence (random + sine) covers at least what each level covers alone:
    FDS add (Miner's rule) and ERS envelope, so no ratio can fall (closed form)."""
    from qualplan.planning import coverage

    sine = _env(session, engineer, unit, road, "rotor sine", m.EnvironmentKind.sine, {
        "bands": [{"f_lo_hz": 20.0, "f_hi_hz": 200.0, "quantity": "acceleration",
                   "amplitude": 2.0}],
        "sweep": {"rate_oct_per_min": 1.0, "direction": "up", "sweeps": 2}})
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    rnd = _random_level(session, engineer, unit, [story["flight_env"].revisions[-1]])
    sin = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="sine Z", kind="sine", axis=m.Axis.Z,
        revision_ids=[sine.revisions[-1].id], policy_id=gevs.id))
    rules = policies.rules_of(gevs)
    both = coverage.program_coverage(session, unit, m.Axis.Z, m.Grade.qualification, rules)
    assert both.tests == ["random Z #1", "sine Z #1"]
    for alone in (levels.result_of(rnd).coverage, levels.result_of(sin).coverage):
        assert alone.fn_hz == both.fn_hz
        for b in both.by_b:
            assert np.all(np.asarray(both.by_b[b].fds_ratio_db) >=
                          np.asarray(alone.by_b[b].fds_ratio_db) - 1e-9)
        assert np.all(np.asarray(both.ers.ers_ratio_db) >= np.asarray(alone.ers.ers_ratio_db)
                      - 1e-9)


def test_random_level_from_a_record_stays_in_the_band(session, engineer, unit, road):
    """A measured record becomes a random level through its maximax PSD, limited to the
    policy's band; its g rms is close to the PSD the record was made from."""
    from qualplan.dynamics.synthesis import gaussian_from_psd

    rng = np.random.default_rng(11)
    f, a = [20.0, 2000.0], [0.01, 0.01]  # flat: 0.01 x 1980 Hz -> 4.45 g rms (closed form)
    x = gaussian_from_psd(f, a, 60.0, 8192.0, rng=rng)
    rec = environments.create_environment(session, engineer, s.EnvironmentCreate(
        product_id=unit.id, phase_id=road.id, name="road record Z",
        kind=m.EnvironmentKind.time_history, axis=m.Axis.Z,
        data={"dt_s": 1 / 8192.0, "accel_g": x.tolist()}))
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    level = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="from record", kind="random", axis=m.Axis.Z,
        purpose=m.LevelPurpose.analysis, revision_ids=[rec.revisions[-1].id],
        policy_id=gevs.id))
    limit = level.result["limit"]
    assert limit["freq_hz"][0] >= 20.0 and limit["freq_hz"][-1] <= 2000.0
    # Conservative: the level is never below the record's maximax PSD at any line, so
    # (with overwhelming probability) above the true 4.45 g rms; and no worse than the
    # flat line at the highest maximax line, which a 2-point profile achieves (the
    # simplification minimises the area among profiles above the data).
    from qualplan.dynamics.signal import maximax_psd

    # the analysis the derivation printed (resolution resolving 20 Hz with 4 lines)
    cfg = next(st["values"] for st in level.result["steps"] if st["step"] == "record analysis")
    assert cfg["resolution_hz"] == pytest.approx(5.0, rel=0.01)
    est = maximax_psd(x, 8192.0, window_s=cfg["maximax_window_s"],
                      resolution_hz=cfg["resolution_hz"], overlap=cfg["overlap"])
    band = (est.freq_hz >= limit["freq_hz"][0]) & (est.freq_hz <= limit["freq_hz"][-1])
    on_lines = psd.asd_at(limit["freq_hz"], limit["asd_g2_hz"], est.freq_hz[band])
    assert np.all(on_lines >= est.asd_g2_hz[band] * (1 - 1e-9))
    width = limit["freq_hz"][-1] - limit["freq_hz"][0]
    assert math.sqrt(0.01 * 1980) < limit["grms"]
    assert limit["grms"] <= math.sqrt(est.asd_g2_hz[band].max() * width) * (1 + 1e-9)


def test_shock_test_record_outside_points_are_not_judged(session, engineer, unit, road):
    """Points of an achieved SRS outside the level's band are left out (the tolerance
    applies inside the specified band only); inside, +1 dB passes a -6/+6 dB band."""
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    shock = _env(session, engineer, unit, road, "drop", m.EnvironmentKind.shock,
                 {"freq_hz": [100.0, 1000.0, 2000.0], "accel_g": [10.0, 100.0, 100.0]})
    lvl = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="shock Z", kind="shock", axis=m.Axis.Z,
        revision_ids=[shock.revisions[-1].id], policy_id=gevs.id))
    req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=unit.program_id, key="SHK-1", text="drop", product_id=unit.id,
        level_id=lvl.id, method=m.VerificationMethod.test))
    f = np.geomspace(50.0, 4000.0, 60)
    from qualplan.dynamics.srs import SrsProfile

    nominal = SrsProfile(lvl.result["freq_hz"], lvl.result["accel_g"])
    inside = (f >= 100.0) & (f <= 2000.0)
    values = np.where(inside, nominal.value_at(np.clip(f, 100, 2000)) * 10 ** (1 / 20), 1.0)
    ev = evidence.add_test_record(session, engineer, req.id, s.TestEvidenceIn(
        freq_hz=f.tolist(), values=values.tolist(), shocks=2))
    assert ev.verdict is m.Verdict.passed, ev.summary["reason"]
    assert ev.summary["worst_deviation_db"] == pytest.approx(1.0, abs=1e-6)


def test_fds_equivalent_random_level_compresses_the_life(session, engineer, unit, program):
    """Flat 0.04 g^2/Hz for one hour, as an acceptance test of 60 s (GEVS policy):
    under the narrow-band model G_test = G_env (T_env / T_test)^(2/b), independent of fn
    (Lalanne vol. 5, closed form: 0.04 x 60^(1/4) = 0.111326 for b = 8). The policy's smallest b
    (4) governs: 0.04 x 60^(1/2) = 0.30984 g^2/Hz; the test covers the life's FDS."""
    from qualplan.planning import catalog

    hour = catalog.create_phase(session, engineer, s.PhaseCreate(
        program_id=program.id, name="one hour", duration_s=3600.0))
    flat = _env(session, engineer, unit, hour, "flat hour", m.EnvironmentKind.random,
                {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04]})
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    level = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="equivalent Z", kind="random", axis=m.Axis.Z,
        grade=m.Grade.acceptance, combination="fds_equivalent",
        revision_ids=[flat.revisions[-1].id], policy_id=gevs.id))
    r = level.result
    assert r["duration_s"] == 60.0
    mid = psd.asd_at(r["limit"]["freq_hz"], r["limit"]["asd_g2_hz"], [100.0, 500.0])
    assert mid == pytest.approx([0.04 * 60 ** 0.5] * 2, rel=0.01)
    assert "time compression" not in [st["step"] for st in r["steps"]]
    for b, item in r["coverage"]["by_b"].items():
        assert item["worst_db"] >= -0.05, (b, item["worst_db"])
