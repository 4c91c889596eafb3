"""The qualplan command line (typer). Thin: parse, call planning or store, print.

Every command takes ``--db URL`` (default: ``QUALPLAN_DATABASE_URL`` or the SQLite
file in the per-user data folder). Known failures print one line on stderr and
exit non-zero, without a traceback.
"""

from __future__ import annotations

import getpass
import os
import sys
from contextvars import ContextVar
from pathlib import Path
from typing import Annotated

import typer
from pydantic import ValidationError
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DataError

from qualplan import __version__
from qualplan.cli.output import SafeStream, safe_text
from qualplan.config import Settings
from qualplan.dynamics.errors import InputError
from qualplan.planning import access
from qualplan.planning.errors import PlanningError, StoredDataCorrupt
from qualplan.store import migrate
from qualplan.store.session import (
    DatabaseUrlError,
    make_engine,
    make_sessionmaker,
    masked,
    normalise_url,
    unit_of_work,
)

app = typer.Typer(
    name="qualplan",
    # Plain help: rich markup would take unit hints such as "[s]" or "[kg]" for tags.
    rich_markup_mode=None,
    help="Qualification planning for dynamic environments (PSD, sine, SRS, FDS, ERS).",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)
db_app = typer.Typer(
    rich_markup_mode=None, help="Schema migrations of the database.", no_args_is_help=True)
app.add_typer(db_app, name="db")

DbOption = Annotated[
    str | None,
    typer.Option(
        "--db",
        help="Database URL (sqlite:///file.db or postgresql://user@host/db); "
        "default QUALPLAN_DATABASE_URL or the per-user SQLite file.",
        show_default=False,
    ),
]


class CliError(Exception):
    """A failure to report in one line (exit code 2)."""


def settings_for(db: str | None) -> Settings:
    settings = Settings()
    if db:
        settings = settings.model_copy(update={"database_url": db})
    return settings


def database_url(db: str | None) -> str:
    url = normalise_url(settings_for(db).database_url)
    parsed = make_url(url)
    if parsed.drivername.startswith("sqlite") and parsed.database not in (None, "", ":memory:"):
        folder = Path(parsed.database).expanduser().parent
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise CliError(f"cannot create the folder of database {masked(url)}: {exc}") from exc
    return url


def checked_engine(db: str | None):
    """An engine on a database whose schema matches the code (else a one-line error)."""
    engine = make_engine(database_url(db))
    migrate.check_schema(engine)
    return engine


def _show_version(value: bool) -> None:
    if value:
        typer.echo(__version__)
        raise typer.Exit(0)


#: The API token given with ``qualplan --token`` or ``QUALPLAN_TOKEN`` (cli.common reads it).
cli_token: ContextVar[str | None] = ContextVar("qualplan_cli_token", default=None)


# The one callback of the app (typer keeps only the last one registered): every option
# of ``qualplan`` itself, before the command, is here.
@app.callback()
def _main_options(
    show_version: Annotated[bool, typer.Option(
        "--version", help="Print the qualplan version and exit.", is_eager=True,
        callback=_show_version)] = False,
    token: Annotated[str | None, typer.Option(
        "--token", envvar="QUALPLAN_TOKEN", show_default=False,
        help="Act as the user of this API token (default: the user with your login name, "
        "or QUALPLAN_ACTOR).")] = None,
) -> None:
    """Qualification planning for dynamic environments (PSD, sine, SRS, FDS, ERS)."""
    cli_token.set(token)


@app.command()
def version() -> None:
    """Print the qualplan version."""
    typer.echo(__version__)


def default_user_name() -> str:
    """QUALPLAN_ACTOR, else the login name."""
    name = os.environ.get("QUALPLAN_ACTOR")
    if name:
        return name
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "local"


@app.command()
def init(
    db: DbOption = None,
    admin: Annotated[str | None, typer.Option(
        "--admin", help="Name of the first admin, made when the database has no user yet "
        "(default: QUALPLAN_ACTOR or your login name).", show_default=False)] = None,
) -> None:
    """Create the database (if needed), migrate it, and make the first admin."""
    url = database_url(db)
    migrate.upgrade(url)
    engine = make_engine(url)
    try:
        typer.echo(f"database {masked(url)} is at schema revision "
                   f"{migrate.check_schema(engine)}")
        with unit_of_work(make_sessionmaker(engine, write=True)) as session:
            first = access.first_admin(session, admin or default_user_name())
        if first is not None:
            typer.echo(f"first admin: {safe_text(first.name)} (the CLI acts as this user "
                       "under this login name; `qualplan user add` makes more users)")
    finally:
        engine.dispose()


@db_app.command("upgrade")
def db_upgrade(
    revision: Annotated[str, typer.Argument(help="Target revision.")] = "head",
    db: DbOption = None,
) -> None:
    """Migrate the schema forward (default: to the newest revision)."""
    url = database_url(db)
    migrate.upgrade(url, revision)
    engine = make_engine(url)
    typer.echo(f"database {masked(url)} is at schema revision {migrate.current_revision(engine)}")


@db_app.command("downgrade")
def db_downgrade(
    revision: Annotated[str, typer.Argument(help="Target revision (e.g. 0001, or base).")],
    yes: Annotated[bool, typer.Option(
        "--yes", help="Confirm a downgrade that undoes a data migration or drops stored "
        "data.")] = False,
    db: DbOption = None,
) -> None:
    """Migrate the schema back to REVISION (tables added after it are dropped)."""
    url = database_url(db)
    undone = migrate.data_migrations_undone(make_engine(url), revision)
    if undone and not yes:
        raise CliError(
            f"downgrading to {revision} undoes data migration "
            + ", ".join(f"{r} ({why})" for r, why in undone)
            + ": stored rows are moved or dropped; back up the database first and repeat "
            "with --yes")
    migrate.downgrade(url, revision)
    engine = make_engine(url)
    current = migrate.current_revision(engine) or "base (empty)"
    typer.echo(f"database {masked(url)} is at schema revision {current}")


@db_app.command("verify")
def db_verify(db: DbOption = None) -> None:
    """Check every stored revision, record chunk, level and document against its hash
    (and, on SQLite, the database file); exit 1 listing each row that does not match."""
    from qualplan.planning.integrity import verify_database
    from qualplan.store.session import make_sessionmaker

    engine = checked_engine(db)
    try:
        with make_sessionmaker(engine)() as session:
            report = verify_database(session)
    finally:
        engine.dispose()
    for table, n in report.checked.items():
        typer.echo(f"{table}: {n} rows checked")
    for problem in report.file_problems:
        typer.echo(f"database file: {safe_text(problem)}")
    for bad in report.mismatches:
        typer.echo(f"CORRUPT {safe_text(str(bad))}")
    if not report.ok:
        n = len(report.mismatches) + len(report.file_problems)
        typer.echo(f"error: stored data corrupt: {n} problem(s); restore the database from "
                   "a backup", err=True)
        raise typer.Exit(1)
    typer.echo(f"ok: {sum(report.checked.values())} rows match their hashes")


@db_app.command("current")
def db_current(db: DbOption = None) -> None:
    """Print the schema revision of the database and the code's head revision."""
    url = database_url(db)
    engine = make_engine(url)
    current = migrate.current_revision(engine)
    head = migrate.head_revision()
    state = "up to date" if current == head else "needs `qualplan db upgrade`"
    if current is not None and current not in migrate.known_revisions():
        state = "newer than this qualplan"
    typer.echo(f"{current or 'none'} (head {head}: {state})")


@app.command()
def serve(
    host: Annotated[str, typer.Option(help="Interface to listen on.")] = "127.0.0.1",
    port: Annotated[int, typer.Option(help="TCP port.")] = 8000,
    workers: Annotated[int, typer.Option(
        help="API processes (PostgreSQL only; needs QUALPLAN_WEB_SECRET when > 1).")] = 1,
    db: DbOption = None,
) -> None:
    """Serve the HTTP API (/api/v1) and the web pages (/) with uvicorn."""
    import inspect
    import os

    import uvicorn

    url = database_url(db)
    check_workers(url, workers, settings_for(db).web_secret)
    checked_engine(db).dispose()
    # The service (API + web pages) reads its Settings from the environment; the CLI and
    # the other interfaces stay independent (no import between them).
    os.environ["QUALPLAN_DATABASE_URL"] = url
    extra = {}
    if workers > 1 and "timeout_worker_healthcheck" in inspect.signature(uvicorn.run).parameters:
        # uvicorn (0.30 and later) kills a process that has not answered its supervisor
        # within 5 s of starting: importing numpy, scipy and numba and checking the schema
        # takes longer on a busy machine, and the processes were restarted for ever
        extra["timeout_worker_healthcheck"] = WORKER_START_S
    # access_log=False: the service logs every request itself (api.requestlog, with the
    # request id, user and duration); uvicorn's own line per request doubled the logging.
    # http/loop "auto": httptools and uvloop (dependencies) parse and loop in C.
    uvicorn.run("qualplan.service:create_service", factory=True, host=host, port=port,
                log_level="info", workers=workers, access_log=False, **extra)


#: Seconds an API process of `serve --workers N` may take to start and to answer its
#: supervisor's health check.
WORKER_START_S = 120


def check_workers(url: str, workers: int, web_secret: str | None) -> None:
    """Refuse a process count the database or the web sessions cannot serve."""
    if workers < 1:
        raise CliError(f"--workers={workers}: must be 1 or more")
    if workers == 1:
        return
    if make_url(url).drivername.startswith("sqlite"):
        raise CliError(f"--workers={workers}: the SQLite database {masked(url)} serves one "
                       "process (one writer at a time, file locks); use PostgreSQL for "
                       "several API processes")
    if not web_secret:
        raise CliError(f"--workers={workers}: set QUALPLAN_WEB_SECRET, so that every process "
                       "signs and accepts the same web session cookies")


KNOWN_ERRORS = (
    CliError,
    DatabaseUrlError,
    migrate.DatabaseUnavailable,
    migrate.SchemaMismatch,
    PlanningError,
)


def _one_line(exc: Exception) -> str:
    """A bad value in one line: pydantic's first error as field=value: rule."""
    if isinstance(exc, ValidationError):
        errs = exc.errors()
        first = errs[0] if errs else {}
        field = ".".join(str(p) for p in first.get("loc", ())) or "input"
        more = f" (and {len(errs) - 1} more)" if len(errs) > 1 else ""
        return f"{field}={first.get('input')!r:.80}: {first.get('msg', 'invalid')}{more}"
    return str(exc)


def main(argv: list[str] | None = None) -> None:
    """Console entry point: run the typer app, turn known errors into one line."""
    out, sys.stdout = sys.stdout, SafeStream(sys.stdout)
    try:
        code = app(args=argv, standalone_mode=False)
    except StoredDataCorrupt as exc:
        typer.echo(f"error: {safe_text(str(exc))}", err=True)
        sys.exit(1)
    except KNOWN_ERRORS as exc:
        typer.echo(f"error: {safe_text(str(exc))}", err=True)
        sys.exit(2)
    except (InputError, ValidationError) as exc:
        typer.echo(f"error: {safe_text(_one_line(exc))}", err=True)
        sys.exit(2)
    except (OverflowError, DataError) as exc:  # a value beyond what the database stores
        first = str(getattr(exc, "orig", exc)).splitlines()[0][:200]
        typer.echo(f"error: a value does not fit the database ({safe_text(first)})", err=True)
        sys.exit(2)
    except OSError as exc:  # disk full, permissions, a missing folder: name the cause
        where = f": {exc.filename}" if exc.filename else ""
        typer.echo(f"error: {safe_text(exc.strerror or str(exc))}{safe_text(str(where))}",
                   err=True)
        sys.exit(1)
    except typer.Exit as exc:
        sys.exit(exc.exit_code)
    except typer.Abort:
        typer.echo("aborted", err=True)
        sys.exit(1)
    except Exception as exc:  # click usage errors (click's own or the copy typer bundles)
        if callable(getattr(exc, "show", None)) and isinstance(getattr(exc, "exit_code", None),
                                                                int):
            exc.show()
            sys.exit(exc.exit_code)
        raise
    finally:
        sys.stdout = out
    if isinstance(code, int) and code != 0:
        sys.exit(code)
