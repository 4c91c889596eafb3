"""Migrations: upgrade -> downgrade -> upgrade with data; schema checks; no model drift."""

from __future__ import annotations

import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect, text
from sqlalchemy.exc import DBAPIError

from qualplan.store import migrate
from qualplan.store.base import Base
from qualplan.store.session import make_engine


def test_upgrade_downgrade_upgrade_keeps_data(fresh_db_url):
    migrate.upgrade(fresh_db_url)
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('Survey drone', 'kept', CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM programs")).scalar_one()
        conn.execute(text("INSERT INTO products (program_id, name, part_number, description, "
                          "created_at, version) VALUES (:p, 'Camera unit', 'CU-1', '', "
                          "CURRENT_TIMESTAMP, 1)"), {"p": pid})
    assert "documents" in inspect(engine).get_table_names()

    migrate.downgrade(fresh_db_url, "0001")
    engine.dispose()
    assert migrate.current_revision(engine) == "0001"
    assert "documents" not in inspect(engine).get_table_names()

    migrate.upgrade(fresh_db_url)
    assert migrate.check_schema(engine) == migrate.head_revision()
    with engine.connect() as conn:
        rows = conn.execute(text("SELECT p.name, r.name FROM programs p "
                                 "JOIN products r ON r.program_id = p.id")).all()
    assert rows == [("Survey drone", "Camera unit")]
    engine.dispose()


def test_documents_gain_their_program_and_keep_their_rows(fresh_db_url):
    """0002 -> 0003 moves each document's program in from its product; downgrading puts
    a program-wide document back on the program's first root product."""
    migrate.upgrade(fresh_db_url, "0002")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('P', '', CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM programs")).scalar_one()
        conn.execute(text("INSERT INTO products (program_id, name, part_number, description, "
                          "created_at, version) VALUES (:p, 'U', '', '', CURRENT_TIMESTAMP, 1)"),
                     {"p": pid})
        uid = conn.execute(text("SELECT id FROM products")).scalar_one()
        conn.execute(text("INSERT INTO documents (product_id, kind, number, revision, title, "
                          "content_hash, input_hashes, note, author, created_at) VALUES "
                          "(:u, 'audit', 'MCA-P', 1, 't', 'h', '{}', '', 'a', "
                          "CURRENT_TIMESTAMP)"), {"u": uid})
    migrate.upgrade(fresh_db_url, "0003")
    engine.dispose()
    with engine.begin() as conn:
        assert conn.execute(text("SELECT program_id, product_id FROM documents")).one() == \
            (pid, uid)
        conn.execute(text("INSERT INTO documents (program_id, product_id, kind, number, "
                          "revision, title, content_hash, input_hashes, note, author, "
                          "created_at) VALUES (:p, NULL, 'audit', 'MCA-P', 2, 't', 'h', '{}', "
                          "'', 'a', CURRENT_TIMESTAMP)"), {"p": pid})
    with pytest.raises(DBAPIError, match="immutable"):
        with engine.begin() as conn:
            conn.execute(text("UPDATE documents SET note = 'edited'"))
    migrate.downgrade(fresh_db_url, "0002")
    engine.dispose()
    with engine.connect() as conn:
        rows = conn.execute(text("SELECT revision, product_id FROM documents "
                                 "ORDER BY revision")).all()
    assert rows == [(1, uid), (2, uid)]
    engine.dispose()


def test_check_schema_refuses_empty_behind_and_ahead(fresh_db_url):
    engine = make_engine(fresh_db_url)
    with pytest.raises(migrate.SchemaMismatch, match="no qualplan schema.*qualplan init"):
        migrate.check_schema(engine)
    migrate.upgrade(fresh_db_url, "0001")
    with pytest.raises(migrate.SchemaMismatch, match="behind.*qualplan db upgrade"):
        migrate.check_schema(engine)
    migrate.upgrade(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("UPDATE alembic_version SET version_num = '9999'"))
    with pytest.raises(migrate.SchemaMismatch, match="newer than this qualplan"):
        migrate.check_schema(engine)
    engine.dispose()


def test_models_and_migrations_agree(engine):
    """Like `alembic check`: the migrated schema matches the models, nothing to generate."""
    with engine.connect() as conn:
        ctx = MigrationContext.configure(conn, opts={"compare_type": True,
                                                     "include_object": migrate.ours})
        diff = compare_metadata(ctx, Base.metadata)
    assert diff == []


def test_record_chunks_upgrade_downgrade_upgrade(fresh_db_url):
    """0003 -> 0007 adds the chunked-record tables with their append-only triggers;
    downgrading drops them (the samples cannot live in the older schema) and keeps the
    revisions."""
    migrate.upgrade(fresh_db_url, "0007")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('P', '', CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM programs")).scalar_one()
        conn.execute(text("INSERT INTO products (program_id, name, part_number, description, "
                          "created_at, version) VALUES (:p, 'U', '', '', CURRENT_TIMESTAMP, 1)"),
                     {"p": pid})
        uid = conn.execute(text("SELECT id FROM products")).scalar_one()
        conn.execute(text("INSERT INTO environments (product_id, name, kind, axis, units, "
                          "source, provenance, created_at, version) VALUES (:u, 'rec', "
                          "'time_history', 'all', 'g', '', '', CURRENT_TIMESTAMP, 1)"),
                     {"u": uid})
        eid = conn.execute(text("SELECT id FROM environments")).scalar_one()
        conn.execute(text("INSERT INTO environment_revisions (environment_id, number, spec, "
                          "content_hash, author, note, created_at) VALUES (:e, 1, '{}', 'h', "
                          "'a', '', CURRENT_TIMESTAMP)"), {"e": eid})
        rid = conn.execute(text("SELECT id FROM environment_revisions")).scalar_one()
        conn.execute(text("INSERT INTO record_channels (revision_id, \"index\", name, axis, "
                          "unit, source_unit, calibration) VALUES (:r, 0, 'ch0', 'X', 'g', "
                          "'g', 1.0)"), {"r": rid})
        conn.execute(text("INSERT INTO record_chunks (revision_id, channel_index, seq, "
                          "n_samples, sha256, data) VALUES (:r, 0, 0, 1, 'h', :d)"),
                     {"r": rid, "d": b"x"})
    for sql in ("UPDATE record_chunks SET seq = 1", "DELETE FROM record_channels"):
        with pytest.raises(DBAPIError, match="immutable"):
            with engine.begin() as conn:
                conn.execute(text(sql))
    migrate.downgrade(fresh_db_url, "0003")
    engine.dispose()
    names = inspect(engine).get_table_names()
    assert "record_chunks" not in names and "record_channels" not in names
    migrate.upgrade(fresh_db_url, "0007")
    engine.dispose()
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM environment_revisions")).scalar() == 1
        assert conn.execute(text("SELECT count(*) FROM record_chunks")).scalar() == 0
    engine.dispose()


def test_transfer_tables_are_append_only_and_downgrade_cleanly(fresh_db_url):
    """0006: transfer rule revisions and environment derivations refuse UPDATE and DELETE
    through raw SQL (triggers); downgrading to 0003 removes the four tables, upgrading
    again restores them with their triggers."""
    migrate.upgrade(fresh_db_url, "0006")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('P', '', CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM programs")).scalar_one()
        conn.execute(text("INSERT INTO transfer_rules (program_id, name, kind, created_at) "
                          "VALUES (:p, 'zone A', 'zone_transmissibility', CURRENT_TIMESTAMP)"),
                     {"p": pid})
        rid = conn.execute(text("SELECT id FROM transfer_rules")).scalar_one()
        conn.execute(text("INSERT INTO transfer_rule_revisions (rule_id, number, spec, basis, "
                          "provenance, content_hash, author, note, created_at) VALUES "
                          "(:r, 1, '{}', 'test', '', 'h', 'a', '', CURRENT_TIMESTAMP)"),
                     {"r": rid})
    for sql in ("UPDATE transfer_rule_revisions SET note = 'x'",
                "DELETE FROM transfer_rule_revisions"):
        with pytest.raises(DBAPIError, match="immutable"), engine.begin() as conn:
            conn.execute(text(sql))
    migrate.downgrade(fresh_db_url, "0003")
    engine.dispose()
    names = set(inspect(engine).get_table_names())
    assert not names & {"mountings", "transfer_rules", "transfer_rule_revisions",
                        "environment_derivations", "level_force_limits"}
    migrate.upgrade(fresh_db_url, "0006")
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('Q', '', CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM programs WHERE name = 'Q'")).scalar_one()
        conn.execute(text("INSERT INTO transfer_rules (program_id, name, kind, created_at) "
                          "VALUES (:p, 'z', 'mass_attenuation', CURRENT_TIMESTAMP)"), {"p": pid})
        rid = conn.execute(text("SELECT id FROM transfer_rules")).scalar_one()
        conn.execute(text("INSERT INTO transfer_rule_revisions (rule_id, number, spec, basis, "
                          "provenance, content_hash, author, note, created_at) VALUES "
                          "(:r, 1, '{}', 'handbook', '', 'h', 'a', '', CURRENT_TIMESTAMP)"),
                     {"r": rid})
    with pytest.raises(DBAPIError, match="immutable"), engine.begin() as conn:
        conn.execute(text("DELETE FROM transfer_rule_revisions"))
    engine.dispose()


def test_memberships_upgrade_keeps_everyone_in(fresh_db_url):
    """0011 -> 0014: every existing non-admin user becomes a member of every existing
    program with its global role (admins stay global); downgrade drops the two tables."""
    migrate.upgrade(fresh_db_url, "0011")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        for name in ("Kestrel", "Osprey"):
            conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                              "VALUES (:n, '', CURRENT_TIMESTAMP, 1)"), {"n": name})
        for name, role in (("vera", "viewer"), ("ed", "engineer"), ("root", "admin")):
            conn.execute(text("INSERT INTO users (name, role, active, created_at) "
                              "VALUES (:n, :r, :a, CURRENT_TIMESTAMP)"),
                         {"n": name, "r": role, "a": True})
    migrate.upgrade(fresh_db_url, "0014")
    with engine.connect() as conn:
        rows = conn.execute(text(
            "SELECT u.name, p.name, m.role FROM memberships m JOIN users u ON u.id = m.user_id "
            "JOIN programs p ON p.id = m.program_id ORDER BY u.name, p.name")).all()
    assert [tuple(r) for r in rows] == [
        ("ed", "Kestrel", "engineer"), ("ed", "Osprey", "engineer"),
        ("vera", "Kestrel", "viewer"), ("vera", "Osprey", "viewer")]
    with engine.begin() as conn, pytest.raises(DBAPIError):
        conn.execute(text("INSERT INTO memberships (user_id, program_id, role, created_at) "
                          "SELECT id, 1, 'admin', CURRENT_TIMESTAMP FROM users "
                          "WHERE name = 'root'"))
    migrate.downgrade(fresh_db_url, "0011")
    engine.dispose()
    names = inspect(engine).get_table_names()
    assert "memberships" not in names and "sign_ins" not in names
    migrate.upgrade(fresh_db_url)
    assert migrate.check_schema(engine) == migrate.head_revision()


def test_withdrawals_and_signoffs_are_append_only_and_downgrade_keeps_waivers(fresh_db_url):
    """0009: withdrawals, supersessions, document levels, sign-offs and waiver requests
    refuse UPDATE and DELETE (triggers); a withdrawal names exactly one target; downgrading
    to 0007 removes them and the new waiver columns and keeps the waivers."""
    migrate.upgrade(fresh_db_url, "0009")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('P', '', CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM programs")).scalar_one()
        conn.execute(text("INSERT INTO products (program_id, name, part_number, description, "
                          "created_at, version) VALUES (:p, 'U', '', '', CURRENT_TIMESTAMP, 1)"),
                     {"p": pid})
        uid = conn.execute(text("SELECT id FROM products")).scalar_one()
        conn.execute(text("INSERT INTO environments (product_id, name, kind, axis, units, "
                          "source, provenance, created_at, version) VALUES (:u, 'e', 'random', "
                          "'Z', 'g^2/Hz', '', '', CURRENT_TIMESTAMP, 1)"), {"u": uid})
        eid = conn.execute(text("SELECT id FROM environments")).scalar_one()
        conn.execute(text("INSERT INTO withdrawals (environment_id, reason, actor, created_at) "
                          "VALUES (:e, 'replaced by issue C', 'eve', CURRENT_TIMESTAMP)"),
                     {"e": eid})
        conn.execute(text("INSERT INTO requirements (program_id, product_id, key, text, method, "
                          "acceptance_criterion, required_margin, created_at, updated_at, "
                          "version) VALUES (:p, :u, 'R-1', 't', 'inspection', '', 0, "
                          "CURRENT_TIMESTAMP, CURRENT_TIMESTAMP, 1)"), {"p": pid, "u": uid})
        rid = conn.execute(text("SELECT id FROM requirements")).scalar_one()
        conn.execute(text("INSERT INTO waivers (requirement_id, approver, rationale, expires_at, "
                          "created_at) VALUES (:r, 'alan', 'accepted by the board', "
                          "CURRENT_TIMESTAMP, CURRENT_TIMESTAMP)"), {"r": rid})
    assert engine.connect().execute(text("SELECT without_evidence FROM waivers")).scalar_one() \
        in (0, False)
    for sql in ("UPDATE withdrawals SET reason = 'x'", "DELETE FROM withdrawals"):
        with pytest.raises(DBAPIError, match="immutable"), engine.begin() as conn:
            conn.execute(text(sql))
    with pytest.raises(DBAPIError), engine.begin() as conn:  # no target at all
        conn.execute(text("INSERT INTO withdrawals (reason, actor, created_at) VALUES "
                          "('why not, really', 'eve', CURRENT_TIMESTAMP)"))
    migrate.downgrade(fresh_db_url, "0007")
    engine.dispose()
    names = set(inspect(engine).get_table_names())
    assert not names & {"withdrawals", "level_supersessions", "document_levels", "signoffs",
                        "waiver_requests"}
    assert "request_id" not in {c["name"] for c in inspect(engine).get_columns("waivers")}
    with engine.connect() as conn:
        assert conn.execute(text("SELECT approver FROM waivers")).scalar_one() == "alan"
    migrate.upgrade(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO withdrawals (environment_id, reason, actor, created_at) "
                          "VALUES (:e, 'replaced by issue D', 'eve', CURRENT_TIMESTAMP)"),
                     {"e": eid})
    with pytest.raises(DBAPIError, match="immutable"), engine.begin() as conn:
        conn.execute(text("DELETE FROM withdrawals"))
    engine.dispose()
