"""Defects of the planning layer found while building the API, pinned so they flip
when fixed (the API works around them; see the API report)."""

from __future__ import annotations

import pytest
from sqlalchemy.exc import IntegrityError

from qualplan.planning import catalog, requirements
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import ValidationFailed

ENGINEER = Actor("gap-eve", s.Role.engineer)


@pytest.mark.xfail(strict=True, raises=IntegrityError,
                   reason="planning: RequirementUpdate lets an explicit null through to a "
                   "NOT NULL column (IntegrityError instead of ValidationFailed)")
def test_requirement_update_refuses_null_for_a_required_field(session):
    program = catalog.create_program(session, ENGINEER, s.ProgramCreate(name="gap program"))
    unit = catalog.create_product(session, ENGINEER, s.ProductCreate(program_id=program.id,
                                                                      name="unit"))
    req = requirements.create_requirement(session, ENGINEER, s.RequirementCreate(
        program_id=program.id, key="GAP-1", text="t", product_id=unit.id,
        method=s.VerificationMethod.test))
    with pytest.raises(ValidationFailed) as exc:
        requirements.update_requirement(session, ENGINEER, req.id, s.RequirementUpdate(
            method=None, expected_version=req.version))
    assert exc.value.field == "method"
