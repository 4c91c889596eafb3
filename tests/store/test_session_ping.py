"""PostgreSQL: a pooled connection idle for PING_IDLE_S is pinged before use, and one
that the server closed meanwhile is replaced; a connection back from a request a moment
ago is handed out without a ping."""

from __future__ import annotations

import time

import pytest
from sqlalchemy import text
from sqlalchemy.pool import NullPool

from qualplan.store import session as store_session


def test_idle_connection_closed_by_the_server_is_replaced(db_url, monkeypatch):
    if not db_url.startswith("postgresql"):
        pytest.skip("pool pings are PostgreSQL's (SQLite has no server to lose)")
    monkeypatch.setattr(store_session, "PING_IDLE_S", 0.2)
    engine = store_session.make_engine(db_url)
    pings = []
    real_ping = engine.dialect.do_ping

    def counted(conn):
        pings.append(1)
        return real_ping(conn)

    monkeypatch.setattr(engine.dialect, "do_ping", counted)
    try:
        with engine.connect() as conn:
            pid = conn.execute(text("SELECT pg_backend_pid()")).scalar()
        with engine.connect() as conn:  # back a moment ago: the same, not pinged
            assert conn.execute(text("SELECT pg_backend_pid()")).scalar() == pid
        assert pings == []
        killer = store_session.make_engine(db_url, poolclass=NullPool)
        with killer.connect() as other:  # another connection ends the pooled one's backend
            other.execute(text("SELECT pg_terminate_backend(:p)"), {"p": pid})
            other.commit()
        killer.dispose()
        time.sleep(0.5)
        with engine.connect() as conn:  # idle: pinged, found closed, replaced
            assert conn.execute(text("SELECT 1")).scalar() == 1
            assert conn.execute(text("SELECT pg_backend_pid()")).scalar() != pid
        assert pings
    finally:
        engine.dispose()
