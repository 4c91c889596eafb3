"""Fixtures for the use cases: actors of each role and a small program."""

from __future__ import annotations

import pytest

from qualplan.planning import catalog, policies
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.store.models import Role


@pytest.fixture
def engineer() -> Actor:
    return Actor("eve", Role.engineer)


@pytest.fixture
def approver() -> Actor:
    return Actor("alan", Role.approver)


@pytest.fixture
def viewer() -> Actor:
    return Actor("vic", Role.viewer)


@pytest.fixture
def program(session, engineer):
    prog = catalog.create_program(session, engineer, s.ProgramCreate(name="Ridge survey drone"))
    policies.ensure_default_policies(session, engineer)
    return prog


@pytest.fixture
def unit(session, engineer, program):
    return catalog.create_product(session, engineer, s.ProductCreate(
        program_id=program.id, name="Camera electronics", part_number="RSD-CE-01", mass_kg=2.4))


@pytest.fixture
def road(session, engineer, program):
    return catalog.create_phase(session, engineer, s.PhaseCreate(
        program_id=program.id, name="road transport", duration_s=3600.0, occurrences=2))
