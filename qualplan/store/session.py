"""Engine and session factory from one database URL.

SQLite: foreign keys on, WAL journal, a busy timeout, and the pysqlite
transaction workaround so SAVEPOINTs work (SQLAlchemy 2 docs, "SQLite -
Serializable isolation / Savepoints / Transactional DDL"). PostgreSQL: psycopg 3; a
pooled connection that has been idle for :data:`PING_IDLE_S` is pinged before it is
handed out (:func:`_ping_idle_connections`).
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from contextlib import contextmanager

from sqlalchemy import Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError, DisconnectionError, NoSuchModuleError
from sqlalchemy.orm import Session, sessionmaker

import qualplan.store.guards  # noqa: F401  (registers the immutability guard)
import qualplan.store.integrity  # noqa: F401  (registers the hash checks on read)

SQLITE_BUSY_TIMEOUT_MS = 5000
#: Execution option naming the SQLite BEGIN mode of a transaction ("" or "IMMEDIATE").
BEGIN_OPTION = "qualplan_sqlite_begin"


class DatabaseUrlError(ValueError):
    """The database URL cannot be parsed or names an unknown driver."""


def masked(url: str) -> str:
    """The URL with its password hidden, for messages and logs."""
    try:
        return make_url(url).render_as_string(hide_password=True)
    except ArgumentError:
        return url.split("@")[-1] if "@" in url else url


def normalise_url(url: str) -> str:
    """Use the psycopg 3 driver for plain ``postgresql://`` URLs."""
    try:
        parsed = make_url(url)
    except ArgumentError as exc:
        raise DatabaseUrlError(f"cannot parse database URL {masked(url)!r}") from exc
    if parsed.drivername in ("postgresql", "postgres"):
        parsed = parsed.set(drivername="postgresql+psycopg")
    return parsed.render_as_string(hide_password=False)


def make_engine(url: str, **kwargs) -> Engine:
    """Create an engine for `url` with the settings qualplan relies on."""
    url = normalise_url(url)
    try:
        if url.startswith("sqlite"):
            engine = create_engine(
                url, connect_args={"timeout": SQLITE_BUSY_TIMEOUT_MS / 1000}, **kwargs
            )
            _configure_sqlite(engine)
        else:
            engine = create_engine(url, **kwargs)
            _ping_idle_connections(engine)
    except (ArgumentError, NoSuchModuleError) as exc:
        raise DatabaseUrlError(f"unusable database URL {masked(url)!r}: {exc}") from exc
    return engine


#: A pooled PostgreSQL connection idle for longer than this [s] is pinged before use.
PING_IDLE_S = 5.0
_IDLE_SINCE = "qualplan_idle_since"


def _ping_idle_connections(engine: Engine) -> None:
    """Ping a pooled connection before use when it has been idle for PING_IDLE_S.

    ``pool_pre_ping`` pinged at every checkout: one more round trip to the server per
    request, for a connection that another request had used a moment before. A
    connection that has waited in the pool (the server restarted, a proxy dropped it)
    is still pinged, and a failed ping makes the pool open another (the checkout event
    raising DisconnectionError: SQLAlchemy 2.0 documentation, "Connection Pooling:
    Dealing with Disconnects" and ``PoolEvents.checkout``). A connection that breaks
    within the idle time fails its request's statement; SQLAlchemy then invalidates the
    pool's connections, so the following requests open new ones."""

    @event.listens_for(engine, "checkin")
    def _on_checkin(_dbapi_conn, record) -> None:
        if record is not None:
            record.info[_IDLE_SINCE] = time.monotonic()

    @event.listens_for(engine, "checkout")
    def _on_checkout(dbapi_conn, record, _proxy) -> None:
        since = record.info.get(_IDLE_SINCE)
        if since is None or time.monotonic() - since < PING_IDLE_S:
            return  # new, or back in the pool a moment ago
        try:
            engine.dialect.do_ping(dbapi_conn)
        except Exception as exc:  # the server closed it: the pool opens another
            raise DisconnectionError("an idle pooled connection failed its ping") from exc


def _configure_sqlite(engine: Engine) -> None:
    memory = engine.url.database in (None, "", ":memory:")

    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn, _record) -> None:
        # Let SQLAlchemy emit BEGIN itself (pysqlite would defer it and break SAVEPOINT).
        dbapi_conn.isolation_level = None
        cur = dbapi_conn.cursor()
        cur.execute("PRAGMA foreign_keys=ON")
        cur.execute(f"PRAGMA busy_timeout={SQLITE_BUSY_TIMEOUT_MS}")
        if not memory:
            cur.execute("PRAGMA journal_mode=WAL")
        cur.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn) -> None:
        # "IMMEDIATE" for writing units (make_sessionmaker(write=True)): the write lock is
        # taken at BEGIN, so a second writer waits (busy timeout) instead of failing with
        # SQLITE_BUSY_SNAPSHOT after it has read.
        mode = conn.get_execution_options().get(BEGIN_OPTION, "")
        conn.exec_driver_sql(f"BEGIN {mode}".rstrip())


def make_sessionmaker(engine: Engine, *, write: bool = False) -> sessionmaker[Session]:
    """Sessions on `engine`. ``write=True`` is for units of work that change data: on
    SQLite their transactions begin IMMEDIATE (one writer at a time, the others wait up
    to the busy timeout); on PostgreSQL it changes nothing."""
    bind = engine
    if write and engine.dialect.name == "sqlite":
        bind = engine.execution_options(**{BEGIN_OPTION: "IMMEDIATE"})
    return sessionmaker(bind=bind, expire_on_commit=False)


@contextmanager
def unit_of_work(factory: sessionmaker[Session]) -> Iterator[Session]:
    """One transaction: commit at the end, roll back on any error.

    The commit is outside the ``try``: when it fails, closing the session rolls back; and
    an error raised by an after-commit hook (a job dispatch) propagates as itself instead
    of being hidden by a rollback of the already committed transaction ("This session is
    in 'committed' state")."""
    with factory() as session:
        try:
            yield session
        except BaseException:
            session.rollback()
            raise
        session.commit()
