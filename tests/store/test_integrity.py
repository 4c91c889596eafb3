"""Integrity guards (migration 0008): append-only tables refuse REPLACE, UPSERT and
TRUNCATE; stored revisions and documents are checked against their hashes on read and by
`qualplan db verify`; a downgrade to 0002 and back keeps every document row."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from sqlalchemy import inspect, select, text
from sqlalchemy.exc import DBAPIError

from qualplan.planning import catalog, documents, environments, integrity
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import StoredDataCorrupt
from qualplan.store import migrate
from qualplan.store import models as m
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work

#: Every append-only table: the tables of the models the ORM guard refuses to change
#: (a new immutable model without database guards fails these tests).
APPEND_ONLY = tuple(sorted(model.__tablename__ for model in m.IMMUTABLE_MODELS))
ENGINEER = Actor("eve", m.Role.engineer)
# GSFC-STD-7000 (GEVS) Table 2.4-3 component acceptance breakpoints (invented use here).
GEVS_ACC = {"freq_hz": [20.0, 50.0, 800.0, 2000.0], "asd_g2_hz": [0.013, 0.08, 0.08, 0.013]}


class JsonRenderer:
    """Writes the document's content as JSON (what the tests need of a renderer)."""

    def render(self, content, out_dir: Path) -> list[Path]:
        path = Path(out_dir) / f"{content.number}-r{content.revision}.json"
        path.write_text(content.model_dump_json())
        return [path]


@pytest.fixture
def filled(fresh_db_url, tmp_path):
    """A database at head with a program, a product, an environment of two revisions and
    two issued audits (program-wide, and of the product)."""
    migrate.upgrade(fresh_db_url)
    engine = make_engine(fresh_db_url)
    factory = make_sessionmaker(engine, write=True)
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, ENGINEER, s.ProgramCreate(name="Ridge drone"))
        unit = catalog.create_product(session, ENGINEER, s.ProductCreate(
            program_id=prog.id, name="Camera electronics", part_number="RD-CE-1"))
        env = environments.create_environment(session, ENGINEER, s.EnvironmentCreate(
            product_id=unit.id, name="road random", kind=m.EnvironmentKind.random,
            axis=m.Axis.Z, source="invented", data=GEVS_ACC))
        environments.revise_environment(session, ENGINEER, env.id, s.RevisionIn(
            data={**GEVS_ACC, "asd_g2_hz": [0.026, 0.16, 0.16, 0.026]}))
        for product_id in (None, unit.id):
            content = documents.audit_content(session, prog.id, product_id)
            documents.issue_document(session, ENGINEER, content, JsonRenderer(), tmp_path)
        ids = {"program": prog.id, "unit": unit.id, "environment": env.id}
    yield fresh_db_url, engine, factory, ids
    engine.dispose()


def _tamper(engine, sql: str, params=None) -> None:
    """Change a row the way someone with direct database access would (guards off)."""
    with engine.begin() as conn:
        if engine.dialect.name == "postgresql":
            conn.execute(text("SET LOCAL session_replication_role = replica"))
        else:
            for (name,) in conn.execute(text(
                    "SELECT name FROM sqlite_master WHERE type = 'trigger'")).all():
                conn.execute(text(f"DROP TRIGGER {name}"))
        conn.execute(text(sql), params or {})


def _dump(engine, table: str) -> list[dict]:
    with engine.connect() as conn:
        return [dict(r) for r in conn.execute(text(f"SELECT * FROM {table} ORDER BY id"))
                .mappings()]


# --- 1. REPLACE / UPSERT / TRUNCATE ------------------------------------------------------


def test_every_append_only_table_has_every_guard(filled):
    _, engine, _, _ = filled
    with engine.connect() as conn:
        if engine.dialect.name == "sqlite":
            names = set(conn.execute(text(
                "SELECT name FROM sqlite_master WHERE type = 'trigger'")).scalars())
            wanted = {f"{t}_no_{a}" for t in APPEND_ONLY for a in ("update", "delete",
                                                                   "replace")}
        else:
            names = set(conn.execute(text(
                "SELECT tgname FROM pg_trigger WHERE NOT tgisinternal")).scalars())
            wanted = {f"{t}_{a}" for t in APPEND_ONLY for a in ("immutable", "no_truncate")}
    assert wanted <= names, sorted(wanted - names)


@pytest.mark.parametrize("table", ["events", "environment_revisions", "documents"])
def test_replace_and_upsert_of_an_existing_row_refused(filled, table):
    _, engine, _, _ = filled
    before = _dump(engine, table)
    assert before
    cols = ", ".join(before[0])
    if engine.dialect.name == "sqlite":
        statements = [f"INSERT OR REPLACE INTO {table} SELECT * FROM {table} WHERE id = :i",
                      f"REPLACE INTO {table} SELECT * FROM {table} WHERE id = :i",
                      f"INSERT INTO {table} ({cols}) SELECT {cols} FROM {table} WHERE id = :i "
                      "AND 1 ON CONFLICT (id) DO UPDATE SET id = excluded.id"]
    else:
        statements = [f"INSERT INTO {table} ({cols}) SELECT {cols} FROM {table} WHERE id = :i "
                      "ON CONFLICT (id) DO UPDATE SET id = excluded.id"]
    for sql in statements:
        with pytest.raises(DBAPIError, match="immutable"):
            with engine.begin() as conn:
                conn.execute(text(sql), {"i": before[0]["id"]})
    assert _dump(engine, table) == before


def test_replace_over_a_unique_key_refused_but_new_rows_go_in(filled):
    """REPLACE on another id but the same (environment, number) would delete the old
    revision; a new revision (new key) still goes in."""
    _, engine, factory, ids = filled
    if engine.dialect.name != "sqlite":
        pytest.skip("REPLACE is SQLite's; PostgreSQL has no such statement")
    before = _dump(engine, "environment_revisions")
    cols = [c for c in before[0] if c != "id"]
    with pytest.raises(DBAPIError, match="REPLACE refused"):
        with engine.begin() as conn:
            conn.execute(text(f"INSERT OR REPLACE INTO environment_revisions ({', '.join(cols)}) "
                              f"SELECT {', '.join(cols)} FROM environment_revisions WHERE id = :i"),
                         {"i": before[0]["id"]})
    assert _dump(engine, "environment_revisions") == before
    with unit_of_work(factory) as session:
        rev = environments.revise_environment(session, ENGINEER, ids["environment"],
                                              s.RevisionIn(data=GEVS_ACC))
    assert rev.number == 3


@pytest.mark.parametrize("table", APPEND_ONLY)
def test_truncate_refused_on_postgresql(filled, table):
    _, engine, _, _ = filled
    if engine.dialect.name != "postgresql":
        pytest.skip("TRUNCATE is PostgreSQL's (SQLite's DELETE without WHERE fires the "
                    "row trigger)")
    with engine.connect() as conn:
        n = conn.execute(text(f"SELECT count(*) FROM {table}")).scalar_one()
    with pytest.raises(DBAPIError, match="immutable"):
        with engine.begin() as conn:
            conn.execute(text(f"TRUNCATE {table} CASCADE"))
    with engine.connect() as conn:
        assert conn.execute(text(f"SELECT count(*) FROM {table}")).scalar_one() == n


# --- 2. hashes checked on read and by db verify ------------------------------------------


def test_rewritten_revision_is_refused_on_read_and_listed_by_verify(filled):
    url, engine, factory, ids = filled
    with factory() as session:
        first = session.scalars(select(m.EnvironmentRevision).order_by(
            m.EnvironmentRevision.id)).first()
        rev_id = first.id
        assert integrity.verify_database(session).ok
    spec = dict(first.spec)
    spec["asd_g2_hz"] = [0.013, 0.8, 0.8, 0.013]   # ten times the PSD, hash left as it was
    _tamper(engine, "UPDATE environment_revisions SET spec = :s WHERE id = :i",
            {"s": json.dumps(spec), "i": rev_id})
    with factory() as session, pytest.raises(StoredDataCorrupt) as err:
        environments.history(session, ids["environment"])
    assert err.value.table == "environment_revisions" and err.value.row_id == rev_id
    assert f"environment_revisions id={rev_id}" in str(err.value)
    with factory() as session:
        report = integrity.verify_database(session)
    assert not report.ok
    assert [(b.table, b.row_id) for b in report.mismatches] == [("environment_revisions",
                                                                  rev_id)]
    assert report.checked["environment_revisions"] == 2 and report.checked["documents"] == 2


def test_document_row_changed_is_refused_on_read(filled):
    _, engine, factory, ids = filled
    with factory() as session:
        docs = documents.list_documents(session)
        target = next(d for d in docs if d.product_id is None)
    _tamper(engine, "UPDATE documents SET product_id = :u WHERE id = :i",
            {"u": ids["unit"], "i": target.id})
    with factory() as session, pytest.raises(StoredDataCorrupt, match=f"documents id={target.id}"):
        documents.list_documents(session)
    with factory() as session:
        bad = integrity.verify_database(session).mismatches
    assert [(b.table, b.row_id) for b in bad] == [("documents", target.id)]


def test_db_verify_cli_exit_codes_and_listing(filled):
    url, engine, factory, _ = filled

    def verify():
        return subprocess.run([sys.executable, "-m", "qualplan.cli", "db", "verify", "--db", url],
                              capture_output=True, text=True, timeout=120)

    ok = verify()
    assert ok.returncode == 0, ok.stderr
    assert "environment_revisions: 2 rows checked" in ok.stdout and "ok:" in ok.stdout
    with engine.connect() as conn:
        lid = conn.execute(text("SELECT max(id) FROM environment_revisions")).scalar_one()
    _tamper(engine, "UPDATE environment_revisions SET note = note, content_hash = :h "
                    "WHERE id = :i", {"h": "0" * 64, "i": lid})
    bad = verify()
    assert bad.returncode == 1
    assert f"CORRUPT environment_revisions id={lid}" in bad.stdout
    assert bad.stderr.strip().startswith("error: stored data corrupt") and \
        "Traceback" not in bad.stderr


# --- 3. downgrade round trip -------------------------------------------------------------


def test_downgrade_to_0002_and_back_keeps_every_document_row(filled):
    url, engine, factory, _ = filled
    before = _dump(engine, "documents")
    assert any(r["product_id"] is None for r in before)   # a program-wide audit
    events = _dump(engine, "events")
    revisions = _dump(engine, "environment_revisions")
    migrate.downgrade(url, "0002")
    engine.dispose()
    migrate.upgrade(url)
    engine.dispose()
    assert _dump(engine, "documents") == before
    assert _dump(engine, "events") == events
    assert _dump(engine, "environment_revisions") == revisions
    assert "documents_program_wide" not in inspect(engine).get_table_names()
    with factory() as session:
        assert integrity.verify_database(session).ok
    test_every_append_only_table_has_every_guard((url, engine, factory, None))


def test_downgrade_of_0008_keeps_the_older_guards(fresh_db_url):
    migrate.upgrade(fresh_db_url)
    migrate.downgrade(fresh_db_url, "0007")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO events (at, actor, action, entity, detail) VALUES "
                          "(CURRENT_TIMESTAMP, 'eve', 'test', 'x', '{}')"))
    with pytest.raises(DBAPIError, match="immutable"):
        with engine.begin() as conn:
            conn.execute(text("UPDATE events SET actor = 'mallory'"))
    assert "row_hash" not in {c["name"] for c in inspect(engine).get_columns("documents")}
    engine.dispose()
