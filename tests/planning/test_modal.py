"""Modal summaries, response estimates and their use as analysis evidence."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from qualplan.dynamics import modal as core_modal
from qualplan.io.modal import read_modal_summary
from qualplan.planning import audit, environments, levels, policies, requirements
from qualplan.planning import modal as pm
from qualplan.planning import schemas as s
from qualplan.planning.errors import Conflict, PermissionDenied, ValidationFailed
from qualplan.store import models as m
from qualplan.store.guards import ImmutableRowError

G0 = 9.80665

# An invented modal summary of a 2.4 kg unit: three modes, effective masses on X/Y/Z.
MODES_CSV = b"""# invented modal summary, response in MPa per unit modal coordinate
# response_unit: MPa
mode,fn_hz,zeta,meff_x_kg,meff_y_kg,meff_z_kg,gamma_z,response
1,180.0,0.03,0.10,0.20,1.50,1.22,40.0
2,240.0,0.05,0.05,0.90,0.40,0.63,25.0
3,610.0,0.05,0.60,0.10,0.20,0.45,12.0
"""


def _import(session, actor, unit, content=MODES_CSV, name="FEM rev A", filename="modes.csv"):
    return pm.import_modal_summary(session, actor, unit.id, name, filename, content)


def _env(session, actor, unit, phase, name, kind, data):
    return environments.create_environment(session, actor, s.EnvironmentCreate(
        product_id=unit.id, phase_id=phase.id, name=name, kind=kind, axis=m.Axis.Z, data=data))


def _level(session, actor, unit, env, kind, purpose=m.LevelPurpose.analysis):
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    return levels.derive_level(session, actor, s.LevelRecipe(
        product_id=unit.id, name=f"{kind} Z {purpose.value}", purpose=purpose, kind=kind,
        axis=m.Axis.Z, revision_ids=[env.revisions[-1].id], policy_id=gevs.id))


def test_reader_csv_and_json_agree_and_name_bad_fields():
    t = read_modal_summary("modes.csv", MODES_CSV)
    assert t.fn_hz.tolist() == [180.0, 240.0, 610.0]
    assert t.meff_kg["Z"].tolist() == [1.5, 0.4, 0.2]
    assert t.response_unit == "MPa" and t.response.tolist() == [40.0, 25.0, 12.0]
    doc = json.dumps({"response_unit": "MPa", "modes": [
        {"fn_hz": md["fn_hz"], "q": 1 / (2 * md["zeta"]), "meff_kg": md["meff_kg"],
         "participation": md.get("participation"), "response": md["response"]}
        for md in t.to_spec()["modes"]]}).encode()
    j = read_modal_summary("modes.json", doc)
    np.testing.assert_allclose(j.zeta, t.zeta, rtol=1e-12)
    assert j.to_spec()["modes"][0]["meff_kg"] == t.to_spec()["modes"][0]["meff_kg"]
    from qualplan.dynamics.errors import InputError
    with pytest.raises(InputError, match="row 3: zeta"):
        read_modal_summary("m.csv", b"fn_hz,zeta,meff_z_kg\n10,0.05,1\n20,1.5,1\n")
    with pytest.raises(InputError, match="mode 2: fn_hz"):
        read_modal_summary("m.csv", b"fn_hz,zeta,meff_z_kg\n20,0.05,1\n10,0.05,1\n")
    with pytest.raises(InputError, match="meff_<axis>_kg"):
        read_modal_summary("m.csv", b"fn_hz,zeta\n20,0.05\n")
    with pytest.raises(InputError, match="response_unit"):
        read_modal_summary("m.csv", b"fn_hz,zeta,meff_z_kg,response\n20,0.05,1,3\n")


def test_modal_summary_is_revisioned_and_append_only(session, engineer, viewer, unit):
    rev = _import(session, engineer, unit)
    assert rev.number == 1 and len(rev.spec["modes"]) == 3
    with pytest.raises(Conflict, match="identical to revision 1"):
        _import(session, engineer, unit)
    rev2 = _import(session, engineer, unit, MODES_CSV.replace(b"180.0", b"175.0"))
    assert rev2.number == 2 and rev2.content_hash != rev.content_hash
    assert [r.number for r in pm.history(session, rev.summary_id)] == [1, 2]
    with pytest.raises(PermissionDenied):
        _import(session, viewer, unit, MODES_CSV.replace(b"180.0", b"170.0"))
    with pytest.raises(ValidationFailed, match="meff_z_kg"):  # 3.1 kg > the unit's 2.4 kg
        _import(session, engineer, unit, MODES_CSV.replace(b"1.50", b"2.50"), name="heavy")
    rev.note = "edited"
    with pytest.raises(ImmutableRowError):
        session.flush()
    session.rollback()


def test_random_estimate_matches_core_and_closes_a_requirement(session, engineer, unit, road):
    env = _env(session, engineer, unit, road, "road Z", m.EnvironmentKind.random,
               {"freq_hz": [20.0, 80.0, 350.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.007]})
    level = _level(session, engineer, unit, env, "random")
    rev = _import(session, engineer, unit)
    est = pm.make_estimate(session, engineer, pm.EstimateIn(modal_revision_id=rev.id,
                                                            level_id=level.id))
    q = est.result["quantities"]
    curve = pm.level_curve(level)
    residual = 2.4 - 2.1
    core = core_modal.random_response(curve.freq_hz, curve.values, [180.0, 240.0, 610.0],
                                      [0.03, 0.05, 0.05], [1.5, 0.4, 0.2], residual_kg=residual)
    assert q["base_force_rms_n"]["value"] == pytest.approx(core.force_rms_n, rel=1e-12)
    assert q["base_force_3sigma_n"]["value"] == pytest.approx(3 * core.force_rms_n, rel=1e-12)
    assert est.settings["residual_kg"] == pytest.approx(residual)
    # analysis level: the expected peak uses the life exposure the level covers
    assert est.settings["duration_s"] == level.result["life_exposure_s"]
    u = core_modal.peak_factor(core.nu0_hz, level.result["life_exposure_s"])
    assert q["base_force_expected_peak_n"]["value"] == pytest.approx(u * core.force_rms_n)
    # the stress per unit modal coordinate (MPa) with the participation factors on Z
    qr = core_modal.quantity_random_response(curve.freq_hz, curve.values, [180.0, 240.0, 610.0],
                                             [0.03, 0.05, 0.05], [1.22, 0.63, 0.45],
                                             [40.0, 25.0, 12.0])
    assert q["response_rms"] == {"value": pytest.approx(qr.rms, rel=1e-12), "unit": "MPa rms",
                                 "basis": q["response_rms"]["basis"]}
    assert est.input_hashes["modal_revision"] == {str(rev.id): rev.content_hash}
    assert not pm.read_estimate(session, est).stale

    req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=unit.program_id, key="STR-010", text="Mounting feet carry the random load",
        product_id=unit.id, level_id=level.id, method=m.VerificationMethod.analysis))
    applied = q["base_force_3sigma_n"]["value"]
    allowable = 2.0 * applied
    ev = pm.record_as_evidence(session, engineer, req.id, pm.EstimateEvidenceIn(
        estimate_id=est.id, quantity="base_force_3sigma_n", allowable=allowable,
        factor_of_safety=1.4))
    # MS = allowable / (FS x applied) - 1 = 2 / 1.4 - 1 = 0.428571 (closed form)
    assert ev.achieved_margin == pytest.approx(2 / 1.4 - 1)
    assert requirements.status_of(session, req).status == "verified"

    # a new modal summary revision makes the estimate and the requirement stale
    _import(session, engineer, unit, MODES_CSV.replace(b"180.0", b"175.0"))
    assert pm.read_estimate(session, est).stale
    st = requirements.status_of(session, req)
    assert st.status == "stale" and "modal summary" in st.reason
    with pytest.raises(Conflict, match="stale"):
        pm.record_as_evidence(session, engineer, req.id, pm.EstimateEvidenceIn(
            estimate_id=est.id, quantity="base_force_3sigma_n", allowable=allowable))
    assert audit.audit(session, unit.program_id).counts["stale"] == 1


def test_shock_estimate_cqc_and_level_revision_staleness(session, engineer, unit, road):
    env = _env(session, engineer, unit, road, "landing shock", m.EnvironmentKind.shock,
               {"freq_hz": [100.0, 1000.0, 2000.0], "accel_g": [10.0, 100.0, 100.0], "q": 10.0})
    level = _level(session, engineer, unit, env, "shock")
    rev = _import(session, engineer, unit)
    est = pm.make_estimate(session, engineer, pm.EstimateIn(modal_revision_id=rev.id,
                                                            level_id=level.id))
    q = est.result["quantities"]
    srs = np.interp(np.log([180.0, 240.0, 610.0]), np.log(level.result["freq_hz"]),
                    np.log(level.result["accel_g"]))
    forces = np.array([1.5, 0.4, 0.2]) * np.exp(srs) * G0
    # by hand: ABS is the plain sum of m_eff SRS(fn) g0, SRSS the root sum of squares
    assert q["base_force_abs_n"]["value"] == pytest.approx(forces.sum(), rel=1e-9)
    assert q["base_force_srss_n"]["value"] == pytest.approx(math.sqrt((forces ** 2).sum()),
                                                            rel=1e-9)
    assert q["base_force_srss_n"]["value"] < q["base_force_cqc_n"]["value"] < \
        q["base_force_abs_n"]["value"]
    stress = core_modal.quantity_spectrum_peaks(np.exp(srs), [180.0, 240.0, 610.0],
                                                [1.22, 0.63, 0.45], [40.0, 25.0, 12.0])
    rho = core_modal.cqc_coefficients([180.0, 240.0, 610.0], [0.03, 0.05, 0.05])
    assert q["response_cqc"]["value"] == pytest.approx(core_modal.combine(stress, "cqc", rho),
                                                       rel=1e-9)
    assert q["response_cqc"]["unit"] == "MPa peak"
    assert any("Q = 10" in n for n in est.result["notes"])  # modes at zeta 0.03 read a Q 10 SRS
    # deriving the level again (a new number) makes the estimate stale
    _level(session, engineer, unit, env, "shock")
    assert any("has number 2" in r for r in pm.estimate_staleness(session, est))


def test_sine_estimate_and_bad_inputs(session, engineer, unit, road):
    env = _env(session, engineer, unit, road, "engine sine", m.EnvironmentKind.sine, {
        "bands": [{"f_lo_hz": 5.0, "f_hi_hz": 2000.0, "quantity": "acceleration",
                   "amplitude": 1.0}],
        "sweep": {"rate_oct_per_min": 2.0, "direction": "up", "sweeps": 1}})
    level = _level(session, engineer, unit, env, "sine")
    rev = _import(session, engineer, unit)
    est = pm.make_estimate(session, engineer, pm.EstimateIn(modal_revision_id=rev.id,
                                                            level_id=level.id))
    amp = level.result["accel_g"][0]
    rows = est.result["modes"]
    # per mode: about Q x input at resonance (Q = 1/(2 zeta) = 16.7 for mode 1), within the
    # sqrt(1 + 4 zeta^2) abs-acceleration term (closed form at r = 1)
    assert rows[0]["accel_g"] == pytest.approx(amp / 0.06 * math.sqrt(1 + 0.06 ** 2), rel=2e-3)
    assert est.result["quantities"]["base_force_peak_n"]["unit"] == "N peak"
    with pytest.raises(ValidationFailed, match="axis"):
        pm.make_estimate(session, engineer, pm.EstimateIn(
            modal_revision_id=rev.id, level_id=level.id, axis=m.Axis.X))
    req = requirements.create_requirement(session, engineer, s.RequirementCreate(
        program_id=unit.program_id, key="STR-011", text="x", product_id=unit.id,
        level_id=level.id, method=m.VerificationMethod.analysis))
    with pytest.raises(ValidationFailed, match="quantity"):
        pm.record_as_evidence(session, engineer, req.id, pm.EstimateEvidenceIn(
            estimate_id=est.id, quantity="stress", allowable=1.0))


def test_steinberg_on_a_random_estimate(session, engineer, unit, road):
    env = _env(session, engineer, unit, road, "road Z", m.EnvironmentKind.random,
               {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04]})
    level = _level(session, engineer, unit, env, "random")
    rev = _import(session, engineer, unit)
    est = pm.make_estimate(session, engineer, pm.EstimateIn(modal_revision_id=rev.id,
                                                            level_id=level.id))
    out = pm.steinberg_from_estimate(session, est.id, 1, board_edge_mm=152.4,
                                     component_length_mm=25.4, board_thickness_mm=1.5748)
    row = est.result["modes"][0]
    # Steinberg (3rd ed., constants from memory): B = 6 in, L = 1 in, h = 0.062 in, c = r = 1
    # -> 0.00022 x 6 / 0.062 = 0.021290 in = 0.54077 mm (by hand)
    assert out["z_allow_mm"] == pytest.approx(0.54077, rel=1e-4)
    z3 = 3 * row["accel_rms_g"] * G0 / (2 * math.pi * row["fn_hz"]) ** 2 * 1e3
    assert out["z_3sigma_mm"] == pytest.approx(z3, rel=1e-12)
    assert out["passes"] is (out["z_allow_mm"] >= z3)
    with pytest.raises(ValidationFailed, match="mode"):
        pm.steinberg_from_estimate(session, est.id, 9, board_edge_mm=152.4,
                                   component_length_mm=25.4, board_thickness_mm=1.5748)
