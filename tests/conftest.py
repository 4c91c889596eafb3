"""Shared fixtures: a migrated database per run (SQLite or PostgreSQL) and
transactional sessions that roll back after each test."""

from __future__ import annotations

import pytest
from sqlalchemy.orm import Session

from qualplan.store import migrate
from qualplan.store.session import make_engine
from tests import dbutil


def pytest_report_header(config):
    return f"qualplan test database backend: {dbutil.backend()}"


#: Test folders that use no database (the numeric core and the file readers): the same
#: code runs on either backend, so the PostgreSQL run leaves them to the SQLite run.
DATABASE_FREE = ("dynamics", "io")


def pytest_collection_modifyitems(config, items):
    if dbutil.backend() == "sqlite":
        return
    skip = pytest.mark.skip(reason="uses no database: run by the SQLite run of the suite")
    for item in items:
        parts = item.path.parts
        if "tests" in parts and parts[parts.index("tests") + 1] in DATABASE_FREE:
            item.add_marker(skip)


def pytest_sessionstart(session):
    reason = dbutil.check_server_reachable()
    if reason is not None:
        # Unreachable PostgreSQL is a failure, never a skip (CI runs on both databases).
        pytest.exit(f"QUALPLAN_TEST_DATABASE_URL is set but unreachable: {reason}", returncode=3)


@pytest.fixture(scope="session")
def db_url(tmp_path_factory):
    """URL of a database migrated to head, shared by the whole run."""
    db = dbutil.TestDatabase(tmp_path_factory.mktemp("db"))
    url = db.create()
    migrate.upgrade(url)
    yield url
    db.drop()


@pytest.fixture
def fresh_db_url(tmp_path):
    """URL of a new, empty database (no schema) for one test."""
    db = dbutil.TestDatabase(tmp_path)
    url = db.create()
    yield url
    db.drop()


@pytest.fixture(scope="session")
def engine(db_url):
    eng = make_engine(db_url)
    yield eng
    eng.dispose()


@pytest.fixture
def session(engine):
    """A session inside an outer transaction that is rolled back after the test.

    The code under test may commit: with ``join_transaction_mode="create_savepoint"``
    its commits release SAVEPOINTs (SQLAlchemy 2 docs, "Joining a Session into an
    External Transaction").
    """
    with engine.connect() as conn:
        outer = conn.begin()
        s = Session(bind=conn, join_transaction_mode="create_savepoint", expire_on_commit=False)
        try:
            yield s
        finally:
            s.close()
            outer.rollback()
