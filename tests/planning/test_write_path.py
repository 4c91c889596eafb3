"""The write path of the API's frequent writes: the roles read with the token decide the
role checks (and a grant or a new program in the same transaction is not missed); an
environment revision is numbered after the last one with the statements it needs; a
row locked once is not locked again in the same transaction; evidence added is in the
requirement's list when next read."""

from __future__ import annotations

import pytest
from sqlalchemy import event, select

from qualplan.planning import access, catalog, environments, evidence, requirements
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import NotFound, PermissionDenied
from qualplan.store import models as m
from qualplan.store.repositories import lock_row

ADMIN = Actor("root", m.Role.admin)
# Invented 4-point random spectrum (the locust writes' shape), g^2/Hz over Hz.
PSD = {"freq_hz": [20.0, 80.0, 500.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.01]}


@pytest.fixture
def world(session):
    access.create_user(session, ADMIN, "wendy", m.Role.engineer)
    access.create_user(session, ADMIN, "vic", m.Role.viewer)
    token = access.create_token(session, ADMIN, "wendy", "t")
    vtoken = access.create_token(session, ADMIN, "vic", "t")
    prog = catalog.create_program(session, ADMIN, s.ProgramCreate(name="Write path"))
    access.grant(session, ADMIN, "wendy", prog.id, m.Role.engineer)
    access.grant(session, ADMIN, "vic", prog.id, m.Role.viewer)
    unit = catalog.create_product(session, ADMIN, s.ProductCreate(program_id=prog.id,
                                                                  name="unit"))
    env = environments.create_environment(session, ADMIN, s.EnvironmentCreate(
        product_id=unit.id, name="random", kind=s.EnvironmentKind.random, axis=s.Axis.X,
        data=PSD))
    req = requirements.create_requirement(session, ADMIN, s.RequirementCreate(
        program_id=prog.id, key="R-1", text="inspected", product_id=unit.id,
        method=s.VerificationMethod.inspection))
    session.flush()
    return {"token": token, "vtoken": vtoken, "program": prog, "unit": unit, "env": env,
            "req": req}


class Statements:
    def __init__(self, session):
        self.sql: list[str] = []
        self.engine = session.get_bind().engine

    def __enter__(self):
        event.listen(self.engine, "before_cursor_execute", self._seen)
        return self

    def _seen(self, _conn, _cursor, statement, *_a) -> None:
        self.sql.append(statement)

    def __exit__(self, *exc):
        event.remove(self.engine, "before_cursor_execute", self._seen)


def test_roles_read_with_the_token_decide_without_a_query(session, world):
    actor = access.authenticate(session, world["token"])
    with Statements(session) as seen:
        access.require_in(session, actor, world["program"].id, m.Role.engineer, "editing")
    assert not [q for q in seen.sql if "memberships" in q]
    viewer = access.authenticate(session, world["vtoken"])
    with pytest.raises(PermissionDenied):
        access.require_in(session, viewer, world["program"].id, m.Role.engineer, "editing")


def test_a_grant_in_the_same_transaction_is_seen(session, world):
    viewer = access.authenticate(session, world["vtoken"])
    assert access.role_in(session, viewer, world["program"].id) is m.Role.viewer
    access.grant(session, ADMIN, "vic", world["program"].id, m.Role.approver)
    assert access.role_in(session, viewer, world["program"].id) is m.Role.approver
    access.revoke(session, ADMIN, "vic", world["program"].id)
    assert access.role_in(session, viewer, world["program"].id) is None


def test_a_program_created_in_the_same_transaction_is_its_creators(session, world):
    actor = access.authenticate(session, world["token"])
    prog = catalog.create_program(session, actor, s.ProgramCreate(name="Made now"))
    # not among the roles read with the token: asked of the database (the join)
    unit = catalog.create_product(session, actor, s.ProductCreate(program_id=prog.id,
                                                                  name="new unit"))
    assert unit.program_id == prog.id


def test_revision_numbered_after_the_last_in_few_statements(session, world):
    actor = access.authenticate(session, world["token"])
    env = world["env"]
    with Statements(session) as seen:
        rev = environments.revise_environment(session, actor, env.id, s.RevisionIn(
            data={**PSD, "asd_g2_hz": [0.02, 0.04, 0.04, 0.01]}, note="second",
            expected_revision=1))
    assert rev.number == 2
    # the environment is in the session already: its program and phase (1), its lock
    # (1), its withdrawal (1), the newest revision's number and hash (1), the revision
    # and its event (2)
    assert len(seen.sql) <= 6, seen.sql
    assert sum("FOR UPDATE" in q.upper() for q in seen.sql) <= 1
    again = environments.revise_environment(session, actor, env.id, s.RevisionIn(
        data={**PSD, "asd_g2_hz": [0.03, 0.04, 0.04, 0.01]}, note="third"))
    assert again.number == 3
    stored = session.scalars(select(m.EnvironmentRevision.number).where(
        m.EnvironmentRevision.environment_id == env.id).order_by(
        m.EnvironmentRevision.number)).all()
    assert stored == [1, 2, 3]


def test_a_revision_of_another_program_is_not_found(session, world):
    other = catalog.create_program(session, ADMIN, s.ProgramCreate(name="Other"))
    unit = catalog.create_product(session, ADMIN, s.ProductCreate(program_id=other.id,
                                                                  name="theirs"))
    theirs = environments.create_environment(session, ADMIN, s.EnvironmentCreate(
        product_id=unit.id, name="random", kind=s.EnvironmentKind.random, axis=s.Axis.X,
        data=PSD))
    actor = access.authenticate(session, world["token"])
    with pytest.raises(NotFound):
        environments.revise_environment(session, actor, theirs.id, s.RevisionIn(
            data={**PSD, "asd_g2_hz": [0.02, 0.04, 0.04, 0.01]}, note="not mine"))


def test_a_row_is_locked_once_per_transaction(session, world):
    unit = world["unit"]
    with Statements(session) as seen:
        lock_row(session, m.Product, unit.id)
        lock_row(session, m.Product, unit.id)
    assert len(seen.sql) == 1
    session.commit()  # a new transaction (a SAVEPOINT released here) locks it again
    with Statements(session) as seen:
        lock_row(session, m.Product, unit.id)
    assert len([q for q in seen.sql if "FROM products" in q]) == 1


def test_added_evidence_is_in_the_requirements_list(session, world):
    actor = access.authenticate(session, world["token"])
    req = world["req"]
    assert req.evidence == []
    ev = evidence.add_inspection(session, actor, req.id,
                                 s.InspectionEvidenceIn(passed=True, note="seen"))
    assert [e.id for e in req.evidence] == [ev.id]
