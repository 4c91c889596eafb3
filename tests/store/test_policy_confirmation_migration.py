"""0011: policy confirmations are append-only (triggers refuse UPDATE and DELETE through
raw SQL) and downgrade cleanly to 0013."""

from __future__ import annotations

import pytest
from sqlalchemy import inspect, text
from sqlalchemy.exc import DBAPIError

from qualplan.store import migrate
from qualplan.store.session import make_engine


def test_policy_confirmations_upgrade_downgrade_upgrade(fresh_db_url):
    migrate.upgrade(fresh_db_url, "0011")
    engine = make_engine(fresh_db_url)
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO margin_policies (name, description, basis, rules, "
                          "created_at, updated_at, version) VALUES ('p', '', 'S', '{}', "
                          "CURRENT_TIMESTAMP, CURRENT_TIMESTAMP, 1)"))
        pid = conn.execute(text("SELECT id FROM margin_policies")).scalar_one()
        conn.execute(text("INSERT INTO policy_confirmations (policy_id, policy_version, issue, "
                          "confirmed_by, note, created_at) VALUES (:p, 1, 'S (2021)', 'amy', "
                          "'', CURRENT_TIMESTAMP)"), {"p": pid})
    for sql in ("UPDATE policy_confirmations SET issue = 'x'",
                "DELETE FROM policy_confirmations"):
        with pytest.raises(DBAPIError, match="immutable"):
            with engine.begin() as conn:
                conn.execute(text(sql))
    migrate.downgrade(fresh_db_url, "0013")
    engine.dispose()
    assert "policy_confirmations" not in inspect(engine).get_table_names()
    migrate.upgrade(fresh_db_url, "0011")
    engine.dispose()
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM margin_policies")).scalar() == 1
        assert conn.execute(text("SELECT count(*) FROM policy_confirmations")).scalar() == 0
    engine.dispose()
