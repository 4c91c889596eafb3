"""``qualplan report spec`` and ``qualplan report audit``: issue the documents.

Each command builds the document's content from the database (planning.documents),
renders it (PDF, CSV, JSON) into ``--out`` and records the issued revision. Issuing
again without any change re-renders the same revision; a change makes the next one.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import CliError, DbOption, app
from qualplan.cli.common import ProgramOption, _program, local_actor, work
from qualplan.cli.jobs import WaitOption, follow
from qualplan.cli.output import emit_json, progress
from qualplan.planning import approvals, catalog, documents, jobs
from qualplan.planning.inputs import check_document_number
from qualplan.planning.schemas import Grade
from qualplan.reports import PdfRenderer

report_app = typer.Typer(rich_markup_mode=None,
    help="Issue test-level specifications and audit reports (PDF, CSV, "
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
        help="Level ids, comma-separated: exactly the levels issued (default: the current, "
        "non-withdrawn, non-stale test levels of the grade, listed for confirmation).")] = None,
    number: Annotated[
        str | None, typer.Option(help="Document number (default TLS-<part>-<Q|A|P>).")
    ] = None,
    note: NoteOption = "",
    figures: Annotated[bool, typer.Option(help="Also write each chart as an SVG file.")] = False,
    preview: Annotated[bool, typer.Option(
        "--preview", help="Write a preview (marked, no revision, not recorded); it may show "
        "stale or unconverged levels, marked.")] = False,
    yes: Annotated[bool, typer.Option("--yes", help="Issue the default levels without "
                                      "asking.")] = False,
    program: ProgramOption = None,
    wait: WaitOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Issue the test-level specification of a product for one grade (with --wait or
    --no-wait, built and rendered as a job)."""
    try:
        ids = [int(x) for x in levels.split(",") if x.strip()] if levels else None
    except ValueError as exc:
        raise CliError(f"--levels {levels!r}: give level ids like 3,4,7") from exc
    if number is not None:
        check_document_number(number)
    with work(db) as session:
        prog = _program(session, program) if program else None
        prod = catalog.product_ref(session, prog, product)
        if preview:
            content = documents.specification_content(session, prod.id, grade, level_ids=ids,
                                                      number=number, note=note, preview=True)
            with progress("rendering the preview"):
                files = PdfRenderer(figures=figures).render(content, out)
            if as_json:
                emit_json({"number": content.number, "preview": True,
                           "files": [str(p) for p in files]})
            else:
                typer.echo(f"{content.number} PREVIEW - not issued (nothing recorded)")
                for w in content.warnings:
                    typer.echo(f"  {w}")
                for path in files:
                    typer.echo(f"  {path}")
            return
        if ids is None:
            base = documents.default_baseline(session, prod.id, grade)
            if not as_json:
                typer.echo(f"default baseline of {prod.name}, {grade.value}:")
                for x in base:
                    state = "issue" if x.taken else "LEFT OUT: " + "; ".join(x.reasons)
                    typer.echo(f"  level {x.level_id} {x.name} #{x.number} ({x.kind}, "
                               f"{x.axis}): {state}")
            if not yes and any(x.taken for x in base) and not typer.confirm(
                    "issue these levels?", default=False):
                typer.echo("not issued")
                raise typer.Exit(1)
        if wait is None:
            content = documents.specification_content(session, prod.id, grade,
                                                      level_ids=ids, number=number, note=note)
            with progress("rendering the specification"):
                issued = documents.issue_document(session, local_actor(), content,
                                                  PdfRenderer(figures=figures), out)
    if wait is not None:
        as_job(db, jobs.DocumentJob(document="specification", product_id=prod.id,
                                    grade=grade.value, level_ids=ids, number=number,
                                    note=note, out_dir=str(out.resolve()), figures=figures),
               wait=wait, as_json=as_json)
        return
    _print(issued, as_json)


def as_job(db: str | None, doc: jobs.DocumentJob, *, wait: bool, as_json: bool) -> dict | None:
    """Issue `doc` as a job (progress bar, or the job id with --no-wait); print what it
    issued as :func:`_print` does. Returns the job's result (None with --no-wait)."""
    job = follow(db, lambda session, actor, runner: jobs.submit_document(
        session, actor, doc, runner=runner), wait=wait, as_json=as_json, show=not as_json)
    if not wait:
        return None
    res = job.result
    if as_json:
        emit_json(res)
        return res
    state = "issued" if res["new_revision"] else "unchanged since, re-rendered"
    typer.echo(f"{res['number']} revision {res['revision']} ({state}), content hash "
               f"{res['content_hash'][:12]}")
    for name in res["files"]:
        typer.echo(f"  {Path(res['out_dir']) / name}")
    return res


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
    wait: WaitOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
    figures: Annotated[bool, typer.Option(
        help="Also write each test record's plot over its level as an SVG file.")] = False,
) -> None:
    """Issue the margin-closure audit report (the verdict is printed too; with --wait or
    --no-wait, built and rendered as a job)."""
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product) if product else None
        prog_id, prod_id = prog.id, prod.id if prod else None
    if wait is not None:
        res = as_job(db, jobs.DocumentJob(document="audit", program_id=prog_id,
                                          product_id=prod_id, number=number, note=note,
                                          out_dir=str(out.resolve())),
                     wait=wait, as_json=as_json)
        if res is not None:
            if not as_json:
                typer.echo(res["verdict"])
            if not res["release_ready"]:
                raise typer.Exit(1)
        return
    with work(db) as session:
        content = documents.audit_content(session, prog_id, prod_id,
                                          number=number, note=note)
        with progress("rendering the audit report"):
            issued = documents.issue_document(session, local_actor(), content,
                                              PdfRenderer(figures=figures), out)
    _print(issued, as_json)
    if not as_json:
        typer.echo(content.verdict)
    if not content.release_ready:  # the same gate as `qualplan audit`
        raise typer.Exit(1)


@report_app.command("sign")
def report_sign(
    number: Annotated[str, typer.Argument(help="Document number.")],
    role: Annotated[str, typer.Option(help="prepared, checked or approved.")],
    revision: Annotated[int | None, typer.Option(help="Revision (default: the latest).")] = None,
    db: DbOption = None,
) -> None:
    """Sign an issued document as prepared, checked or approved (QUALPLAN_ACTOR signs);
    three distinct users sign the three roles, approval last."""
    with work(db) as session:
        doc = documents.document_ref(session, number, revision)
        approvals.sign_document(session, local_actor(), doc.id, role)
        rows = documents.approvals_of(session, doc.id)
    typer.echo(f"{doc.number} revision {doc.revision}:")
    _print_approvals(rows)
    typer.echo("issue the document again to print the signatures (the revision stays)")


def _print_approvals(rows) -> None:
    for a in rows:
        who = f"{a.name}, {a.signed_at:%Y-%m-%d %H:%M} UTC" if a.name else "unsigned"
        typer.echo(f"  {a.role:9s} {who}")


@report_app.command("signoffs")
def report_signoffs(
    number: Annotated[str, typer.Argument(help="Document number.")],
    revision: Annotated[int | None, typer.Option(help="Revision (default: the latest).")] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Who signed an issued document, in which role, when."""
    with work(db) as session:
        doc = documents.document_ref(session, number, revision)
        rows = documents.approvals_of(session, doc.id)
    if as_json:
        emit_json([r.model_dump(mode="json") for r in rows])
        return
    typer.echo(f"{doc.number} revision {doc.revision}:")
    _print_approvals(rows)
