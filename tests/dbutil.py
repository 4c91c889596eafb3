"""Test databases: a SQLite file by default, or a private PostgreSQL schema.

Set ``QUALPLAN_TEST_DATABASE_URL`` to a PostgreSQL URL to run the suite there.
Each test run (and each fresh database a test asks for) gets its own schema,
dropped at the end, so runs never see each other's rows.
"""

from __future__ import annotations

import os
import uuid
from pathlib import Path

from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

from qualplan.store.session import normalise_url

SERVER_URL = os.environ.get("QUALPLAN_TEST_DATABASE_URL", "").strip()


def backend() -> str:
    return "postgresql" if SERVER_URL else "sqlite"


class TestDatabase:
    """One empty database: create() gives its URL, drop() removes it."""

    def __init__(self, tmp_dir: Path) -> None:
        self.tmp_dir = tmp_dir
        self.schema: str | None = None
        self.url = ""

    def create(self) -> str:
        if not SERVER_URL:
            path = self.tmp_dir / f"qp_{uuid.uuid4().hex[:8]}.db"
            self.url = f"sqlite:///{path}"
            return self.url
        self.schema = f"qp_test_{uuid.uuid4().hex[:10]}"
        admin = create_engine(normalise_url(SERVER_URL), isolation_level="AUTOCOMMIT")
        with admin.connect() as conn:
            conn.execute(text(f'CREATE SCHEMA "{self.schema}"'))
        admin.dispose()
        base = make_url(normalise_url(SERVER_URL))
        self.url = base.update_query_dict(
            {"options": f"-csearch_path={self.schema}"}
        ).render_as_string(hide_password=False)
        return self.url

    def drop(self) -> None:
        if self.schema is None:
            return
        admin = create_engine(normalise_url(SERVER_URL), isolation_level="AUTOCOMMIT")
        with admin.connect() as conn:
            conn.execute(text(f'DROP SCHEMA IF EXISTS "{self.schema}" CASCADE'))
        admin.dispose()


def check_server_reachable() -> str | None:
    """None when the configured server answers, else the reason."""
    if not SERVER_URL:
        return None
    try:
        eng = create_engine(normalise_url(SERVER_URL))
        with eng.connect() as conn:
            conn.execute(text("SELECT 1"))
        eng.dispose()
    except Exception as exc:  # noqa: BLE001 - report any driver failure
        return f"{type(exc).__name__}: {str(exc).splitlines()[0]}"
    return None

