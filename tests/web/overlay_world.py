"""A program for the overlay-plot pages: an environment with two revisions, a random test
level derived on the newer one, a test requirement with a record that misses the band on
two lines (made through planning, committed for real, unique names)."""

from __future__ import annotations

import numpy as np

from qualplan.planning import (
    access,
    catalog,
    environments,
    evidence,
    levels,
    policies,
    requirements,
)
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.web.conftest import SETUP, unique

FLIGHT = {"freq_hz": [20.0, 80.0, 500.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.01]}
FLIGHT_2 = {"freq_hz": [20.0, 80.0, 500.0, 2000.0], "asd_g2_hz": [0.01, 0.05, 0.05, 0.01]}
#: Lines of the record raised (+) or lowered (-) off the level [dB]: outside +/-3 dB.
OFF_DB = {12: 4.0, 40: -4.0}


def overlay_program(factory, viewer: str) -> dict:
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, SETUP, s.ProgramCreate(name=unique("Overlay")))
        access.grant(session, SETUP, viewer, prog.id, "viewer")
        unit = catalog.create_product(session, SETUP, s.ProductCreate(
            program_id=prog.id, name="Overlay unit"))
        phase = catalog.create_phase(session, SETUP, s.PhaseCreate(
            program_id=prog.id, name="flight", duration_s=3600.0, occurrences=10))
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=unit.id, phase_id=phase.id, name="flight Z", kind="random", axis="Z",
            data=FLIGHT))
        environments.revise_environment(session, SETUP, env.id, s.RevisionIn(
            data=FLIGHT_2, note="new flight data"))
        session.refresh(env)
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        level = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=unit.id, name="qual Z", kind="random", axis=m.Axis.Z,
            revision_ids=[env.revisions[-1].id], policy_id=gevs.id))
        req = requirements.create_requirement(session, SETUP, s.RequirementCreate(
            program_id=prog.id, key=unique("OVL"), text="random Z test", product_id=unit.id,
            level_id=level.id, method=m.VerificationMethod.test))
        r = levels.result_of(level)
        lines = np.geomspace(r.freq_hz[0], r.freq_hz[-1], 80)
        values = np.exp(np.interp(np.log(lines), np.log(r.freq_hz), np.log(r.asd_g2_hz)))
        for i, d in OFF_DB.items():
            values[i] *= 10 ** (d / 10)
        ev = evidence.add_test_record(session, SETUP, req.id, s.TestEvidenceIn(
            freq_hz=lines.tolist(), values=values.tolist(), duration_s=r.duration_s))
        return {"program_id": prog.id, "product_id": unit.id, "env_id": env.id,
                "level_id": level.id, "requirement_id": req.id, "key": req.key,
                "evidence_id": ev.id, "lines": lines.tolist(), "values": values.tolist(),
                "tolerance_db": r.tolerance_db}
