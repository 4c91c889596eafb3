"""The schema: constraints, immutability of append-only rows, optimistic concurrency."""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pytest
from sqlalchemy import text
from sqlalchemy.exc import DBAPIError, IntegrityError
from sqlalchemy.orm.exc import StaleDataError

from qualplan.store import models as m
from qualplan.store.guards import ImmutableRowError
from qualplan.store.hashing import revision_hash
from qualplan.store.repositories import (
    EnvironmentRepository,
    EventRepository,
    ProductRepository,
    ProgramRepository,
    RevisionRepository,
)
from qualplan.store.types import pack_array, unpack_array


def _product(session) -> m.Product:
    program = ProgramRepository(session).add(m.Program(name="Survey drone"))
    return ProductRepository(session).add(m.Product(program_id=program.id, name="Camera unit"))


def _revision(session) -> m.EnvironmentRevision:
    product = _product(session)
    env = EnvironmentRepository(session).add(
        m.Environment(product_id=product.id, name="Road", kind=m.EnvironmentKind.random,
                      axis=m.Axis.Z, units="g^2/Hz")
    )
    spec = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01], "duration_s": 60.0}
    return RevisionRepository(session).add(
        m.EnvironmentRevision(environment_id=env.id, number=1, spec=spec, data=None,
                              content_hash=revision_hash(spec, None), author="test")
    )


def test_array_blob_round_trip_is_exact_and_compact():
    # A long time history is stored as a compressed .npy blob, not a JSON list.
    rng = np.random.default_rng(1)
    samples = np.round(rng.standard_normal(100_000), 3)
    blob = pack_array(samples)
    assert np.array_equal(unpack_array(blob), samples)
    assert len(blob) < samples.nbytes  # compressed below 8 bytes per sample


def test_revision_keeps_array_data(session):
    rev = _revision(session)
    data = np.linspace(0.0, 1.0, 5000)
    rev2 = RevisionRepository(session).add(
        m.EnvironmentRevision(environment_id=rev.environment_id, number=2, spec={"dt_s": 1e-4},
                              data=data, content_hash=revision_hash({"dt_s": 1e-4}, data),
                              author="test")
    )
    session.expire_all()
    again = RevisionRepository(session).get(rev2.id)
    assert np.array_equal(again.data, data)
    assert again.created_at.tzinfo is not None


def test_revision_edit_is_refused_by_the_orm(session):
    rev = _revision(session)
    rev.note = "quietly changed"
    with pytest.raises(ImmutableRowError, match="immutable"):
        session.flush()
    session.rollback()


def test_revision_delete_is_refused_by_the_orm(session):
    rev = _revision(session)
    session.delete(rev)
    with pytest.raises(ImmutableRowError, match="cannot be deleted"):
        session.flush()
    session.rollback()


@pytest.mark.parametrize("statement", [
    "UPDATE environment_revisions SET note = 'raw edit'",
    "DELETE FROM environment_revisions",
])
def test_revision_change_through_raw_sql_is_refused_by_the_database(session, statement):
    _revision(session)
    with pytest.raises(DBAPIError, match="immutable"):
        with session.begin_nested():
            session.execute(text(statement))


def test_event_log_is_append_only(session):
    ev = EventRepository(session).append(actor="a", action="create", entity="program", entity_id=1)
    assert not hasattr(EventRepository, "update") and not hasattr(EventRepository, "delete")
    with pytest.raises(DBAPIError, match="immutable"):
        with session.begin_nested():
            session.execute(text("UPDATE events SET actor = 'b' WHERE id = :i"), {"i": ev.id})


def test_unique_program_name(session):
    ProgramRepository(session).add(m.Program(name="P"))
    with pytest.raises(IntegrityError):
        with session.begin_nested():
            ProgramRepository(session).add(m.Program(name="P"))


def test_foreign_keys_are_enforced(session):
    with pytest.raises(IntegrityError):
        with session.begin_nested():
            session.add(m.Product(program_id=999_999, name="orphan"))
            session.flush()


def test_enum_check_constraint_refuses_unknown_kind(session):
    product = _product(session)
    with pytest.raises((IntegrityError, DBAPIError)):
        with session.begin_nested():
            session.execute(
                text("INSERT INTO environments (product_id, name, kind, axis, units, source, "
                     "provenance, created_at, version) VALUES (:p, 'x', 'earthquake', 'Z', 'g', "
                     "'', '', :t, 1)"),
                {"p": product.id, "t": datetime.now(UTC)},
            )


def test_phase_duration_must_be_positive(session):
    program = ProgramRepository(session).add(m.Program(name="P2"))
    with pytest.raises(IntegrityError):
        with session.begin_nested():
            session.add(m.Phase(program_id=program.id, name="road", duration_s=0.0))
            session.flush()


def test_concurrent_edit_loses_nothing(engine):
    """Two sessions edit the same program: the second gets StaleDataError, not a silent win."""
    from qualplan.store.session import make_sessionmaker, unit_of_work

    factory = make_sessionmaker(engine)
    with unit_of_work(factory) as s:
        prog = ProgramRepository(s).add(m.Program(name="concurrency check"))
        pid = prog.id
    try:
        a, b = factory(), factory()
        # Both engineers read version 1 (each read is its own short transaction, as two
        # HTTP requests would be), then both save.
        pa, pb = a.get(m.Program, pid), b.get(m.Program, pid)
        a.commit()
        b.commit()
        pa.description = "first"
        a.commit()
        pb.description = "second"
        with pytest.raises(StaleDataError):
            b.commit()
        b.rollback()
        a.close()
        b.close()
        with factory() as s:
            assert s.get(m.Program, pid).description == "first"
    finally:
        with unit_of_work(factory) as s:
            s.delete(s.get(m.Program, pid))


def test_product_subtree(session):
    product = _product(session)
    repo = ProductRepository(session)
    child = repo.add(m.Product(program_id=product.program_id, parent_id=product.id, name="board"))
    grandchild = repo.add(m.Product(program_id=product.program_id, parent_id=child.id, name="chip"))
    assert repo.subtree_ids(product.id) == [product.id, child.id, grandchild.id]


def test_sqlite_writers_wait_for_each_other_instead_of_failing(engine):
    """Two writing units that read, pause, then write: with IMMEDIATE transactions the
    second waits for the first and reads its result (no SQLITE_BUSY_SNAPSHOT, nothing
    lost); on PostgreSQL the row lock of the UPDATE does the same job."""
    import threading
    import time

    from qualplan.store.session import make_sessionmaker, unit_of_work

    writer = make_sessionmaker(engine, write=True)
    with unit_of_work(writer) as s:
        pid = ProgramRepository(s).add(m.Program(name="writers take turns")).id
    errors: list[BaseException] = []

    def append(text: str) -> None:
        try:
            with unit_of_work(writer) as s:
                prog = s.get(m.Program, pid, with_for_update=True)
                time.sleep(0.2)
                prog.description += text
        except BaseException as exc:  # noqa: BLE001 - reported by the assertion below
            errors.append(exc)

    threads = [threading.Thread(target=append, args=(t,)) for t in ("a", "b")]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    try:
        assert errors == []
        with writer() as s:
            prog = s.get(m.Program, pid)
            assert sorted(prog.description) == ["a", "b"] and prog.version == 3
    finally:
        with unit_of_work(writer) as s:
            s.delete(s.get(m.Program, pid))
