"""``qualplan report spec`` and ``qualplan report audit``: issue the documents.

Each command builds the document's content from the database (planning.documents),
renders it (PDF, CSV, JSON) into ``--out`` and records the issued revision. Issuing
again without any change re-renders the same revision; a change makes the next one.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import DbOption, app
from qualplan.cli.common import ProgramOption, _program, local_actor, work
from qualplan.cli.output import emit_json, progress
from qualplan.planning import catalog, documents
from qualplan.planning.schemas import Grade
from qualplan.reports import PdfRenderer

report_app = typer.Typer(help="Issue test-level specifications and audit reports (PDF, CSV, "
                         "JSON).", no_args_is_help=True)
app.add_typer(report_app, name="report")

OutOption = Annotated[Path, typer.Option("--out", help="Folder for the PDF, CSV and JSON files.")]
NoteOption = Annotated[str, typer.Option(help="Revision note (why this issue).")]
JsonOption = Annotated[bool, typer.Option("--json", help="Print JSON instead of text.")]


def _print(issued: documents.IssuedDocument, as_json: bool) -> None:
    if as_json:
        emit_json(issued.model_dump(mode="json"))
        return
    state = "issued" if issued.new_revision else "unchanged since, re-rendered"
    typer.echo(f"{issued.number} revision {issued.revision} ({state}), content hash "
               f"{issued.content_hash[:12]}")
    for path in issued.files:
        typer.echo(f"  {path}")


@report_app.command("spec")
def report_spec(
    product: Annotated[str, typer.Option(help="Product name or id.")],
    grade: Annotated[Grade, typer.Option(help="Test grade.")] = Grade.qualification,
    out: OutOption = Path("."),
    levels: Annotated[str | None, typer.Option(
        help="Level ids, comma-separated (default: the newest test levels of the grade).")] = None,
    number: Annotated[
        str | None, typer.Option(help="Document number (default TLS-<part>-<Q|A|P>).")
    ] = None,
    note: NoteOption = "",
    figures: Annotated[bool, typer.Option(help="Also write each chart as an SVG file.")] = False,
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Issue the test-level specification of a product for one grade."""
    ids = [int(x) for x in levels.split(",") if x.strip()] if levels else None
    with work(db) as session:
        prog = _program(session, program) if program else None
        prod = catalog.product_ref(session, prog, product)
        content = documents.specification_content(session, prod.id, grade, level_ids=ids,
                                                  number=number, note=note)
        with progress("rendering the specification"):
            issued = documents.issue_document(session, local_actor(), content,
                                              PdfRenderer(figures=figures), out)
    _print(issued, as_json)


@report_app.command("audit")
def report_audit(
    out: OutOption = Path("."),
    product: Annotated[
        str | None, typer.Option(help="Audit this product and its children only.")
    ] = None,
    number: Annotated[
        str | None, typer.Option(help="Document number (default MCA-<program>).")
    ] = None,
    note: NoteOption = "",
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Issue the margin-closure audit report (the verdict is printed too)."""
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product) if product else None
        content = documents.audit_content(session, prog.id, prod.id if prod else None,
                                          number=number, note=note)
        with progress("rendering the audit report"):
            issued = documents.issue_document(session, local_actor(), content, PdfRenderer(), out)
    _print(issued, as_json)
    if not as_json:
        typer.echo(content.verdict)
    if not content.release_ready:  # the same gate as `qualplan audit`
        raise typer.Exit(1)
