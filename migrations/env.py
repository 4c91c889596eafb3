"""Alembic environment: URL from the caller (qualplan db ...) or QUALPLAN_DATABASE_URL."""

from __future__ import annotations

from alembic import context
from sqlalchemy import pool

from qualplan.store import models  # noqa: F401  (fills the metadata)
from qualplan.store.base import Base
from qualplan.store.migrate import ours
from qualplan.store.session import make_engine
from qualplan.store.types import ArrayBlob, UtcDateTime

config = context.config
target_metadata = Base.metadata


def render_item(type_, obj, autogen_context):
    """Render qualplan's column types as plain SQLAlchemy types: migrations stay static."""
    if type_ == "type" and isinstance(obj, UtcDateTime):
        return "sa.DateTime(timezone=True)"
    if type_ == "type" and isinstance(obj, ArrayBlob):
        return "sa.LargeBinary()"
    return False


def _url() -> str:
    url = config.attributes.get("database_url") or config.get_main_option("sqlalchemy.url")
    if not url:
        from qualplan.config import Settings

        url = Settings().database_url
    return url


def run_migrations_offline() -> None:
    context.configure(
        url=_url(),
        target_metadata=target_metadata,
        literal_binds=True,
        compare_type=True,
        render_as_batch=True,
        render_item=render_item,
        include_object=ours,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    engine = make_engine(_url(), poolclass=pool.NullPool)
    with engine.connect() as conn:
        _run(conn)
    engine.dispose()


def _run(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        compare_type=True,
        render_as_batch=True,
        render_item=render_item,
        include_object=ours,
    )
    with context.begin_transaction():
        context.run_migrations()


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
