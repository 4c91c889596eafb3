"""Schema migrations (alembic) driven from code, and the schema-version check.

Both the service and the CLI call :func:`check_schema` before touching data and
refuse a database that is behind or ahead of the code.
"""

from __future__ import annotations

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine
from sqlalchemy.exc import SQLAlchemyError

from qualplan.resources import data_dir
from qualplan.store.session import make_engine, masked


class SchemaMismatch(RuntimeError):
    """The database schema is not the one this version of qualplan expects."""


class DatabaseUnavailable(RuntimeError):
    """The database cannot be reached or opened."""


def ours(obj, name, type_, reflected, compare_to) -> bool:
    """Alembic's ``include_object`` hook: qualplan's own schema objects only.

    On PostgreSQL the jobs migration installs procrastinate's queue tables, indexes and
    functions (its own schema, managed by procrastinate, not by qualplan's models); they
    are left out of autogenerate and of the models-versus-migrations check."""
    table = getattr(obj, "table", None)
    names = (name or "", getattr(table, "name", "") or "")
    return not any(n.startswith("procrastinate_") or n.startswith("idx_procrastinate_")
                   for n in names)


def alembic_config(url: str) -> Config:
    cfg = Config()
    cfg.set_main_option("script_location", str(data_dir("migrations")))
    cfg.attributes["database_url"] = url
    return cfg


def head_revision() -> str:
    script = ScriptDirectory.from_config(alembic_config("sqlite://"))
    head = script.get_current_head()
    assert head is not None, "migrations folder holds no revision"
    return head


def known_revisions() -> set[str]:
    script = ScriptDirectory.from_config(alembic_config("sqlite://"))
    return {rev.revision for rev in script.walk_revisions()}


def current_revision(engine: Engine) -> str | None:
    try:
        with engine.connect() as conn:
            return MigrationContext.configure(conn).get_current_revision()
    except SQLAlchemyError as exc:
        raise DatabaseUnavailable(
            f"cannot open database {masked(str(engine.url.render_as_string(False)))}: "
            f"{_first_line(exc)}"
        ) from exc


#: Revisions whose downgrade moves or drops stored rows (revision -> what is undone):
#: the first data migration (0003) and every revision whose tables hold stored data.
#: A downgrade through any of them needs the caller's confirmation (``--yes``).
DATA_MIGRATIONS = {
    "0007": "chunked records are dropped",
    "0006": "mountings, transfer rules, derived environments and force limits are dropped",
    "0005": "modal summaries and response estimates are dropped",
    "0003": "program-wide documents are put on a product",
    "0002": "issued documents are dropped",
    "0001": "every table is dropped",
}


def data_migrations_undone(engine: Engine, target: str) -> list[tuple[str, str]]:
    """The data migrations a downgrade from the database's revision to `target` undoes
    ([] when none, or when the database has no schema)."""
    current = current_revision(engine)
    engine.dispose()
    if current is None:
        return []
    script = ScriptDirectory.from_config(alembic_config("sqlite://"))
    try:
        revs = list(script.iterate_revisions(current, target))
    except Exception:  # an unknown or relative target: let alembic name the problem later
        revs = [script.get_revision(r) for r in DATA_MIGRATIONS]
    undone = [r.revision for r in revs if r is not None and r.revision != target]
    return [(r, DATA_MIGRATIONS[r]) for r in undone if r in DATA_MIGRATIONS]


def upgrade(url: str, revision: str = "head") -> None:
    _run(url, command.upgrade, revision)


def downgrade(url: str, revision: str) -> None:
    _run(url, command.downgrade, revision)


def _run(url: str, fn, revision: str) -> None:
    engine = make_engine(url)
    try:
        with engine.begin() as conn:
            cfg = alembic_config(url)
            cfg.attributes["connection"] = conn
            fn(cfg, revision)
    except SQLAlchemyError as exc:
        raise DatabaseUnavailable(
            f"cannot migrate database {masked(url)}: {_first_line(exc)}"
        ) from exc
    finally:
        engine.dispose()


def check_schema(engine: Engine) -> str:
    """Return the current revision if it is the code's head; raise SchemaMismatch otherwise."""
    current = current_revision(engine)
    head = head_revision()
    url = masked(engine.url.render_as_string(hide_password=False))
    if current == head:
        return current
    if current is None:
        raise SchemaMismatch(
            f"database {url} has no qualplan schema; run `qualplan init --db URL` "
            "or `qualplan db upgrade --db URL`"
        )
    if current not in known_revisions():
        raise SchemaMismatch(
            f"database {url} is at schema revision {current}, newer than this qualplan "
            f"(head {head}); upgrade qualplan, or run `qualplan db downgrade {head}` with the "
            "newer version"
        )
    raise SchemaMismatch(
        f"database {url} is at schema revision {current}, behind this qualplan (head {head}); "
        "run `qualplan db upgrade --db URL`"
    )


def _first_line(exc: Exception) -> str:
    orig = getattr(exc, "orig", None) or exc
    text = str(orig).strip().splitlines()
    return text[0] if text else type(orig).__name__
