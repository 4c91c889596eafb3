"""Row scope (store/scope.py) with its own cache key: sessions of different programs in
one process, alternated, each see only their programs' rows, whatever SQL the statement
cache already holds; and a scope's criteria key names its programs."""

from __future__ import annotations

from sqlalchemy import select

from qualplan.planning import catalog, environments
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.store import models as m
from qualplan.store import scope

ADMIN = Actor("scope-admin", s.Role.admin)
PSD = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01], "duration_s": 60.0}


def _program(session, name):
    program = catalog.create_program(session, ADMIN, s.ProgramCreate(name=name))
    product = catalog.create_product(session, ADMIN, s.ProductCreate(
        program_id=program.id, name=f"{name} unit"))
    env = environments.create_environment(session, ADMIN, s.EnvironmentCreate(
        product_id=product.id, name=f"{name} road", kind=s.EnvironmentKind.random,
        axis=s.Axis.Z, data=PSD))
    return program, product, env


def test_alternating_scopes_see_only_their_rows(session):
    a = _program(session, "scope cache A")
    b = _program(session, "scope cache B")
    mine = {a[0].id: a, b[0].id: b}
    try:
        for _ in range(3):  # the second and third rounds run from the statement cache
            for pid, (_prog, product, env) in mine.items():
                other = b if pid == a[0].id else a
                scope.limit_to_programs(session, [pid])
                session.expunge_all()  # no row from the identity map: every get reads
                assert {p.id for p in session.scalars(select(m.Program))} == {pid}
                assert session.get(m.Product, product.id) is not None
                assert session.get(m.Product, other[1].id) is None
                assert session.get(m.Environment, other[2].id) is None
                assert [r.environment_id for r in session.scalars(
                    select(m.EnvironmentRevision))] == [env.id]
                # the one-statement environment read is scoped too
                assert environments.environment_read(session, env.id).id == env.id
                scope.limit_to_programs(session, [pid, other[0].id])
                session.expunge_all()
                assert {p.id for p in session.scalars(select(m.Program))} >= {
                    pid, other[0].id}
    finally:
        scope.clear(session)


def test_the_criteria_key_names_entity_and_programs():
    one, two = scope._criteria(frozenset({1})), scope._criteria(frozenset({1, 2}))
    # programs, the tables by program and by product, revisions, evidence and waivers
    n = 1 + len(scope._BY_PROGRAM) + len(scope._BY_PRODUCT) + 1 + 2
    assert len(one) == len(two) == n
    keys_one = {o._gen_cache_key(None, []) for o in one}
    keys_two = {o._gen_cache_key(None, []) for o in two}
    assert len(keys_one) == n and not keys_one & keys_two
    assert all(k[2] == (1,) for k in keys_one) and all(k[2] == (1, 2) for k in keys_two)
