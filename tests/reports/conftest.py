"""A small fixture database for the documents: one unit, random and sine levels on X, a
shock level on Y, requirements with passing, failing and open evidence.

Built once per module inside a transaction that is rolled back at the end; each test
runs inside a SAVEPOINT of its own, so issued documents never leak between tests.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from sqlalchemy.orm import Session

from qualplan.dynamics import psd
from qualplan.planning import catalog, environments, evidence, levels, policies, requirements
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.store import models as m

ROAD_X = {"freq_hz": [10.0, 40.0, 500.0], "asd_g2_hz": [0.015, 0.015, 0.00015]}
FLIGHT_X = {"freq_hz": [20.0, 80.0, 350.0, 2000.0], "asd_g2_hz": [0.002, 0.01, 0.01, 0.001]}
SHOCK_Y = {"freq_hz": [100.0, 1000.0, 2000.0], "accel_g": [10.0, 100.0, 100.0], "q": 10.0}


def build(session: Session) -> dict:
    eng = Actor("eve", m.Role.engineer)
    prog = catalog.create_program(session, eng, s.ProgramCreate(name="Fixture glider"))
    policies.ensure_default_policies(session, eng)
    unit = catalog.create_product(session, eng, s.ProductCreate(
        program_id=prog.id, name="Radio unit", part_number="FG-RU-7", mass_kg=0.8))
    road = catalog.create_phase(session, eng, s.PhaseCreate(
        program_id=prog.id, name="road", duration_s=3600.0, occurrences=2))
    flight = catalog.create_phase(session, eng, s.PhaseCreate(
        program_id=prog.id, name="flight", duration_s=1800.0, occurrences=20))

    def env(name, phase, kind, axis, data):
        return environments.create_environment(session, eng, s.EnvironmentCreate(
            product_id=unit.id, phase_id=phase.id, name=name, kind=kind, axis=axis, data=data))

    road_x = env("road X", road, m.EnvironmentKind.random, m.Axis.X, ROAD_X)
    flight_x = env("flight X", flight, m.EnvironmentKind.random, m.Axis.X, FLIGHT_X)
    x_pk_pk = 2 * 1.5 * 9.80665 / (2 * math.pi * 15.0) ** 2
    sine_x = env("engine sine", flight, m.EnvironmentKind.sine, m.Axis.X, {
        "bands": [{"f_lo_hz": 5.0, "f_hi_hz": 15.0, "quantity": "displacement",
                   "amplitude": x_pk_pk, "unit": "m", "measure": "peak_to_peak"},
                  {"f_lo_hz": 15.0, "f_hi_hz": 100.0, "quantity": "acceleration",
                   "amplitude": 1.5}],
        "sweep": {"rate_oct_per_min": 2.0, "direction": "up", "sweeps": 1}})
    shock_y = env("landing shock", flight, m.EnvironmentKind.shock, m.Axis.Y, SHOCK_Y)
    gevs = policies.policy_ref(session, "spaceflight-gevs")

    def level(name, kind, axis, envs, grade=m.Grade.qualification):
        return levels.derive_level(session, eng, s.LevelRecipe(
            product_id=unit.id, name=name, grade=grade, kind=kind, axis=axis,
            revision_ids=[e.revisions[-1].id for e in envs], policy_id=gevs.id))

    lv = {
        "random": level("random X", "random", m.Axis.X, [road_x, flight_x]),
        "sine": level("sine X", "sine", m.Axis.X, [sine_x]),
        "shock": level("shock Y", "shock", m.Axis.Y, [shock_y]),
        "acceptance": level("random X", "random", m.Axis.X, [road_x, flight_x],
                            grade=m.Grade.acceptance),
    }

    def req(key, lvl, method=m.VerificationMethod.test):
        return requirements.create_requirement(session, eng, s.RequirementCreate(
            program_id=prog.id, key=key, text=f"{key} text", product_id=unit.id,
            level_id=lvl.id if lvl else None, method=method))

    reqs = {"random": req("RU-001", lv["random"]), "sine": req("RU-002", lv["sine"]),
            "shock": req("RU-003", lv["shock"]), "open": req("RU-004", None,
                                                              m.VerificationMethod.inspection),
            # an acceptance screen: verified on its record alone (coverage not asked)
            "acceptance": req("RU-005", lv["acceptance"])}
    r = lv["acceptance"].result  # the demand on 1/48-octave controller lines
    lines = np.geomspace(r["freq_hz"][0], r["freq_hz"][-1],
                         int(48 * np.log2(r["freq_hz"][-1] / r["freq_hz"][0])) + 1)
    evidence.add_test_record(session, eng, reqs["acceptance"].id, s.TestEvidenceIn(
        freq_hz=lines.tolist(), values=psd.asd_at(r["freq_hz"], r["asd_g2_hz"], lines).tolist(),
        duration_s=r["duration_s"]))
    r = lv["random"].result
    evidence.add_test_record(session, eng, reqs["random"].id, s.TestEvidenceIn(
        freq_hz=r["freq_hz"], values=r["asd_g2_hz"], duration_s=r["duration_s"]))
    r = lv["sine"].result
    low = list(np.asarray(r["accel_g"]) * 0.8)  # 20 % under: outside +/-10 %
    evidence.add_test_record(session, eng, reqs["sine"].id, s.TestEvidenceIn(
        freq_hz=r["freq_hz"], values=low))
    r = lv["shock"].result
    evidence.add_test_record(session, eng, reqs["shock"].id, s.TestEvidenceIn(
        freq_hz=r["freq_hz"], values=r["accel_g"], shocks=r["shocks_per_axis"]))
    session.flush()
    return {"program": prog, "unit": unit, "levels": lv, "requirements": reqs,
            "engineer": eng, "flight_x": flight_x}


@pytest.fixture(scope="module")
def world(engine):
    with engine.connect() as conn:
        outer = conn.begin()
        session = Session(bind=conn, join_transaction_mode="create_savepoint",
                          expire_on_commit=False)
        try:
            yield session, build(session)
        finally:
            session.close()
            outer.rollback()


@pytest.fixture
def db(world):
    session, data = world
    savepoint = session.begin_nested()
    try:
        yield session, data
    finally:
        savepoint.rollback()
        session.expire_all()
