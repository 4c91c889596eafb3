"""What the work commands share: the actor, one unit of work per command, and the
options every command takes.

Each command opens one unit of work, calls one planning use case and prints a table
(or JSON with ``--json``). The CLI acts as a stored user of the database, with that
user's roles (per program; admin is global):

1. the user of the API token given with ``qualplan --token TOKEN ...`` or in
   ``QUALPLAN_TOKEN`` (any database; what a shared PostgreSQL deployment should use);
2. otherwise the user named ``QUALPLAN_ACTOR``, else the user with the login name
   (convenient on the embedded SQLite file: the first ``qualplan init`` makes the
   login name the admin).

A name that is not an active user of the database is refused (one line, exit 2), so no
command records a name that is not a user.
"""

from __future__ import annotations

from contextlib import contextmanager
from contextvars import ContextVar
from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import CliError, app, checked_engine, cli_token, default_user_name
from qualplan.planning import access, catalog
from qualplan.planning.access import Actor
from qualplan.planning.errors import NotAuthenticated
from qualplan.store.session import make_sessionmaker, unit_of_work

JsonOption = Annotated[bool, typer.Option("--json", help="Print JSON instead of a table.")]
ProgramOption = Annotated[str | None, typer.Option("--program", help="Program name or id.")]



def group(name: str, help: str) -> typer.Typer:
    """A command group (``qualplan NAME ...``) registered on the main app."""
    sub = typer.Typer(rich_markup_mode=None, help=help, no_args_is_help=True)
    app.add_typer(sub, name=name)
    return sub


_actor: ContextVar[Actor | None] = ContextVar("qualplan_cli_actor", default=None)


def cli_actor(session) -> Actor:
    """The stored user the command acts as (module docstring); scopes `session` to it."""
    token = cli_token.get()
    if token:
        return access.authenticate(session, token.strip())
    name = default_user_name()
    try:
        return access.actor_for_user(session, name)
    except NotAuthenticated:
        raise NotAuthenticated(
            f"{name!r} is not an active user of this database: give --token (or "
            "QUALPLAN_TOKEN), set QUALPLAN_ACTOR to your user name, or ask an admin for "
            f"`qualplan user add {name} ROLE`") from None


def local_actor() -> Actor:
    """The actor of the running command (resolved when its unit of work opened)."""
    actor = _actor.get()
    if actor is None:
        raise CliError("this command acts outside a unit of work (no user known)")
    return actor


@contextmanager
def work(db: str | None):
    """One unit of work on a database whose schema matches the code, as the CLI's user."""
    engine = checked_engine(db)
    try:
        with unit_of_work(make_sessionmaker(engine, write=True)) as session:
            mark = _actor.set(cli_actor(session))
            try:
                yield session
            finally:
                _actor.reset(mark)
    finally:
        engine.dispose()


def _program(session, ref: str | None):
    if ref is not None:
        return catalog.program_by_name_or_id(session, ref)
    rows = catalog.list_programs(session)
    if len(rows) != 1:
        raise CliError(f"{len(rows)} programs in the database: say which with --program")
    return rows[0]


def _read_file(path: Path) -> bytes:
    try:
        return path.read_bytes()
    except OSError as exc:
        raise CliError(f"cannot read {path}: {exc.strerror}") from exc
