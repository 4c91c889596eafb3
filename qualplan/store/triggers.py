"""Database guards of append-only tables, for migrations: one call per table.

:func:`create_append_only_guards` makes a table refuse, whatever client sends it:

- ``UPDATE`` and ``DELETE`` (row triggers, both dialects);
- on SQLite, ``INSERT OR REPLACE`` / ``REPLACE INTO`` over an existing row: SQLite's
  REPLACE deletes the conflicting row without firing DELETE triggers (unless the
  connection turned ``recursive_triggers`` on), so a ``BEFORE INSERT`` trigger refuses
  an insert whose primary key or any unique key is already present. An UPSERT's
  ``DO UPDATE`` part fires the UPDATE trigger on both dialects;
- on PostgreSQL, ``TRUNCATE`` (a statement-level trigger).

Trigger names: ``<table>_no_update``, ``<table>_no_delete``, ``<table>_no_replace``
(SQLite); ``<table>_immutable`` (row, UPDATE or DELETE) and ``<table>_no_truncate``
(statement) on PostgreSQL, calling ``qualplan_refuse_change()`` (made here if missing).

SQLite batch mode (``op.batch_alter_table``) rebuilds a table and drops its triggers:
call :func:`drop_append_only_guards` before and :func:`create_append_only_guards` after.
Creating is idempotent (existing triggers of these names are kept or replaced).
"""

from __future__ import annotations

from collections.abc import Iterable

from sqlalchemy import inspect, text
from sqlalchemy.engine import Connection

REFUSE_FUNCTION = (
    "CREATE OR REPLACE FUNCTION qualplan_refuse_change() RETURNS trigger LANGUAGE plpgsql "
    "AS $$ BEGIN RAISE EXCEPTION '% rows are immutable', TG_TABLE_NAME; END $$"
)

#: Every guard this module makes (``only=`` of :func:`drop_append_only_guards`).
GUARDS = ("update", "delete", "replace", "truncate")


def _unique_keys(conn: Connection, table: str) -> list[list[str]]:
    """Column lists of the primary key and of every unique constraint and index."""
    insp = inspect(conn)
    keys = [list(insp.get_pk_constraint(table).get("constrained_columns") or [])]
    keys += [list(u["column_names"]) for u in insp.get_unique_constraints(table)]
    keys += [list(i["column_names"]) for i in insp.get_indexes(table) if i.get("unique")]
    out: list[list[str]] = []
    for k in keys:
        if k and all(c is not None for c in k) and k not in out:
            out.append(k)
    return out


def _executor(conn: Connection):
    """Run DDL as text() (which escapes the % of plpgsql bodies for the driver)."""
    return lambda sql: conn.execute(text(sql))


def _q(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def create_append_only_guards(conn: Connection, table: str,
                              guards: Iterable[str] = GUARDS) -> None:
    """Create the append-only triggers of `table` on the connection's dialect."""
    guards = set(guards)
    dialect = conn.dialect.name
    exec_ = _executor(conn)
    if dialect == "sqlite":
        for action in ("update", "delete"):
            if action in guards:
                exec_(f"CREATE TRIGGER IF NOT EXISTS {table}_no_{action} BEFORE "
                      f"{action.upper()} ON {table} "
                      f"BEGIN SELECT RAISE(ABORT, '{table} rows are immutable'); END")
        if "replace" in guards:
            # one EXISTS per key, so that each is answered from its own index
            when = " OR ".join(
                f"EXISTS (SELECT 1 FROM {table} AS t WHERE "
                + " AND ".join(f"t.{_q(c)} = NEW.{_q(c)}" for c in key) + ")"
                for key in _unique_keys(conn, table))
            exec_(f"CREATE TRIGGER IF NOT EXISTS {table}_no_replace BEFORE INSERT ON {table} "
                  f"WHEN {when} "
                  f"BEGIN SELECT RAISE(ABORT, '{table} rows are immutable: a row with this "
                  "key exists (REPLACE refused)'); END")
    elif dialect == "postgresql":
        exec_(REFUSE_FUNCTION)
        if guards & {"update", "delete"}:
            exec_(f"CREATE OR REPLACE TRIGGER {table}_immutable BEFORE UPDATE OR DELETE ON "
                  f"{table} FOR EACH ROW EXECUTE FUNCTION qualplan_refuse_change()")
        if "truncate" in guards:
            exec_(f"CREATE OR REPLACE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table} "
                  "FOR EACH STATEMENT EXECUTE FUNCTION qualplan_refuse_change()")
    else:  # pragma: no cover - qualplan supports SQLite and PostgreSQL only
        raise RuntimeError(f"no append-only guards for database dialect {dialect!r}")


def drop_append_only_guards(conn: Connection, table: str,
                            guards: Iterable[str] = GUARDS) -> None:
    """Drop the append-only triggers of `table` (for a rebuild or a downgrade)."""
    guards = set(guards)
    exec_ = _executor(conn)
    if conn.dialect.name == "sqlite":
        for action in ("update", "delete", "replace"):
            if action in guards:
                exec_(f"DROP TRIGGER IF EXISTS {table}_no_{action}")
    elif conn.dialect.name == "postgresql":
        if guards & {"update", "delete"}:
            exec_(f"DROP TRIGGER IF EXISTS {table}_immutable ON {table}")
        if "truncate" in guards:
            exec_(f"DROP TRIGGER IF EXISTS {table}_no_truncate ON {table}")
