"""What the work commands share: the local actor, one unit of work per command, and the
options every command takes.

Each command opens one unit of work, calls one planning use case and prints a table
(or JSON with ``--json``). The CLI acts with the rights of a local administrator on
the database it opens (the file's or server's own access rules guard it); set
``QUALPLAN_ACTOR`` to record your name on what you change (default: the login name).
"""

from __future__ import annotations

import getpass
import os
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import CliError, app, checked_engine
from qualplan.planning import catalog
from qualplan.planning.access import Actor
from qualplan.planning.schemas import Role
from qualplan.store.session import make_sessionmaker, unit_of_work

JsonOption = Annotated[bool, typer.Option("--json", help="Print JSON instead of a table.")]
ProgramOption = Annotated[str | None, typer.Option("--program", help="Program name or id.")]



def group(name: str, help: str) -> typer.Typer:
    """A command group (``qualplan NAME ...``) registered on the main app."""
    sub = typer.Typer(rich_markup_mode=None, help=help, no_args_is_help=True)
    app.add_typer(sub, name=name)
    return sub


def local_actor() -> Actor:
    name = os.environ.get("QUALPLAN_ACTOR") or _login()
    return Actor(name=name, role=Role.admin)


def _login() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "local"


@contextmanager
def work(db: str | None):
    """One unit of work on a database whose schema matches the code."""
    engine = checked_engine(db)
    try:
        with unit_of_work(make_sessionmaker(engine, write=True)) as session:
            yield session
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
