"""Migration 0005: modal summaries and response estimates (append-only rows)."""

from __future__ import annotations

import pytest
from sqlalchemy import inspect, text
from sqlalchemy.exc import DBAPIError

from qualplan.store import migrate
from qualplan.store.session import make_engine

TABLES = ("modal_summaries", "modal_summary_revisions", "response_estimates")


def test_modal_tables_upgrade_refuse_edits_and_downgrade(fresh_db_url):
    migrate.upgrade(fresh_db_url, "0005")
    engine = make_engine(fresh_db_url)
    assert set(TABLES) <= set(inspect(engine).get_table_names())
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('P', '', CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM programs")).scalar_one()
        conn.execute(text("INSERT INTO products (program_id, name, part_number, description, "
                          "created_at, version) VALUES (:p, 'U', '', '', CURRENT_TIMESTAMP, 1)"),
                     {"p": pid})
        uid = conn.execute(text("SELECT id FROM products")).scalar_one()
        conn.execute(text("INSERT INTO modal_summaries (product_id, name, source, created_at, "
                          "version) VALUES (:u, 'FEM', '', CURRENT_TIMESTAMP, 1)"), {"u": uid})
        sid = conn.execute(text("SELECT id FROM modal_summaries")).scalar_one()
        conn.execute(text("INSERT INTO modal_summary_revisions (summary_id, number, spec, "
                          "content_hash, author, note, created_at) VALUES "
                          "(:s, 1, '{}', 'h', 'a', '', CURRENT_TIMESTAMP)"), {"s": sid})
        # the header is editable (name, source), like an environment
        conn.execute(text("UPDATE modal_summaries SET source = 'model v2'"))
    for sql in ("UPDATE modal_summary_revisions SET note = 'edited'",
                "DELETE FROM modal_summary_revisions"):
        with pytest.raises(DBAPIError, match="immutable"):
            with engine.begin() as conn:
                conn.execute(text(sql))
    migrate.downgrade(fresh_db_url, "0003")
    engine.dispose()
    assert not set(TABLES) & set(inspect(engine).get_table_names())
    migrate.upgrade(fresh_db_url, "0005")
    engine.dispose()
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM modal_summaries")).scalar_one() == 0
        assert conn.execute(text("SELECT name FROM products")).scalar_one() == "U"
    engine.dispose()


def _doc(conn, kind, number):
    pid = conn.execute(text("SELECT min(id) FROM programs")).scalar_one()
    conn.execute(text("INSERT INTO documents (program_id, product_id, kind, number, revision, "
                      "title, content_hash, input_hashes, note, author, created_at) VALUES "
                      "(:p, NULL, :k, :n, 1, 't', 'h', '{}', '', 'a', CURRENT_TIMESTAMP)"),
                 {"p": pid, "k": kind, "n": number})


def test_documents_accept_loads_keep_rows_and_triggers(fresh_db_url):
    migrate.upgrade(fresh_db_url, "0003")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO programs (name, description, created_at, version) "
                          "VALUES ('P', '', CURRENT_TIMESTAMP, 1)"))
        _doc(conn, "audit", "MCA-P")
    with pytest.raises(DBAPIError):
        with engine.begin() as conn:
            _doc(conn, "loads", "ALP-0")
    engine.dispose()
    migrate.upgrade(fresh_db_url, "0005")
    engine.dispose()
    with engine.begin() as conn:
        _doc(conn, "loads", "ALP-1")
        assert conn.execute(text("SELECT count(*) FROM documents")).scalar_one() == 2
    with pytest.raises(DBAPIError):
        with engine.begin() as conn:
            _doc(conn, "drawing", "X-1")
    with pytest.raises(DBAPIError, match="immutable"):
        with engine.begin() as conn:
            conn.execute(text("UPDATE documents SET note = 'edited'"))
    with pytest.raises(RuntimeError, match="loads"):
        migrate.downgrade(fresh_db_url, "0003")
    engine.dispose()
