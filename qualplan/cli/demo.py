"""``qualplan demo``: build the invented demo scenario in its own SQLite database, issue
its documents and print where everything is.

The default folder is ``./qualplan-demo`` (in the current directory); ``--out DIR``
chooses another. The database is ``DIR/qualplan.db``, the documents go to
``DIR/documents``. An existing demo database is refused unless ``--replace`` is given.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import CliError, app, default_user_name
from qualplan.cli.output import progress
from qualplan.planning import access, documents, loads
from qualplan.planning import demo as scenario
from qualplan.planning.schemas import Grade
from qualplan.reports import PdfRenderer
from qualplan.reports.loads import LoadsRenderer
from qualplan.store import migrate
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work

DEFAULT_FOLDER = Path("qualplan-demo")


@app.command("demo")
def demo(
    out: Annotated[Path, typer.Option("--out", help="Folder for the demo database and "
                                      "documents.")] = DEFAULT_FOLDER,
    replace: Annotated[bool, typer.Option(help="Replace an existing demo database in the "
                                          "folder.")] = False,
) -> None:
    """Build the demo scenario (an invented survey-aircraft payload unit) and its documents."""
    start = time.perf_counter()
    out = out.expanduser().resolve()
    db_file = out / "qualplan.db"
    if db_file.exists():
        if not replace:
            raise CliError(f"{db_file} exists already: add --replace to rebuild the demo, "
                           "or choose another --out")
        for suffix in ("", "-wal", "-shm"):
            Path(f"{db_file}{suffix}").unlink(missing_ok=True)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CliError(f"cannot create {out}: {exc.strerror}") from exc
    url = f"sqlite:///{db_file}"
    migrate.upgrade(url)
    engine = make_engine(url)
    docs_dir = out / "documents"
    try:
        factory = make_sessionmaker(engine)
        with progress("building the scenario: environments, levels, coverage, evidence"):
            with unit_of_work(factory) as session:
                summary = scenario.build_demo(session, admin_name=default_user_name())
        issued = []
        with progress("writing the documents"):
            with unit_of_work(factory) as session:
                actor = access.actor_for_user(session, scenario.USER)
                for grade in (Grade.qualification, Grade.acceptance):
                    content = documents.specification_content(session, summary.unit_id, grade)
                    issued.append(documents.issue_document(
                        session, actor, content, PdfRenderer(figures=True), docs_dir))
                issued.append(documents.issue_document(
                    session, actor, loads.loads_content(session, summary.unit_id),
                    LoadsRenderer(), docs_dir))
                audit = documents.audit_content(session, summary.program_id)
                issued.append(documents.issue_document(session, actor, audit, PdfRenderer(),
                                                       docs_dir))
    finally:
        engine.dispose()
    elapsed = time.perf_counter() - start
    typer.echo(f"qualplan demo: {scenario.PROGRAM} ({elapsed:.0f} s)")
    typer.echo(f"database   {db_file}")
    for doc in issued:
        pdf = next(p for p in doc.files if p.suffix == ".pdf")
        csvs = sum(1 for p in doc.files if p.suffix == ".csv")
        typer.echo(f"document   {pdf}  (+ JSON, {csvs} CSV)")
    typer.echo(f"audit      {audit.verdict}")
    for item in audit.blocking:
        typer.echo(f"           {item.key}: {item.status} - {item.reason}")
    typer.echo("")
    typer.echo("Look around:")
    typer.echo(f"  qualplan audit --db {url}")
    typer.echo(f"  qualplan level list --db {url}")
    typer.echo(f"  qualplan serve --db {url}")
    typer.echo("  then open http://127.0.0.1:8000/ (API docs: http://127.0.0.1:8000/api/v1/docs)")
    typer.echo(f"  and sign in as {summary.user} with the token {summary.token}")
