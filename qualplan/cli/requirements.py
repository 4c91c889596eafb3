"""`qualplan req`, `evidence`, `waive` and `audit`: requirements, their evidence, waivers
and the release gate."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import CliError, DbOption, app
from qualplan.cli.common import (
    JsonOption,
    ProgramOption,
    _program,
    _read_file,
    group,
    local_actor,
    work,
)
from qualplan.cli.environments import UnitsOption
from qualplan.cli.output import emit_json, table
from qualplan.planning import (
    approvals,
    audit,
    catalog,
    evidence,
    margins,
    requirements,
)
from qualplan.planning import schemas as s
from qualplan.planning.schemas import (
    VerificationMethod,
)

req_app = group("req", "Requirements and their status.")
evidence_app = group("evidence", "Evidence for a requirement.")


# --- requirements, evidence, waivers, audit ---------------------------------------------


@req_app.command("add")
def req_add(
    key: str,
    text: Annotated[str, typer.Option(help="The requirement's text.")],
    product: Annotated[str, typer.Option(help="Product name or id.")],
    method: Annotated[VerificationMethod, typer.Option(help="Verification method.")],
    level: Annotated[int | None, typer.Option(help="Level id it points at.")] = None,
    criterion: Annotated[str, typer.Option(help="Acceptance criterion.")] = "",
    required_margin: Annotated[
        float, typer.Option(help="Margin the evidence must show (MS for analysis, dB for tests).")
    ] = 0.0,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Add a requirement."""
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product)
        req = requirements.create_requirement(
            session,
            local_actor(),
            s.RequirementCreate(
                program_id=prog.id,
                key=key,
                text=text,
                product_id=prod.id,
                level_id=level,
                method=method,
                acceptance_criterion=criterion,
                required_margin=required_margin,
            ),
        )
    typer.echo(f"requirement {req.key} added (id {req.id})")


@req_app.command("list")
def req_list(
    program: ProgramOption = None, db: DbOption = None, as_json: JsonOption = False
) -> None:
    """List requirements with their computed status."""
    with work(db) as session:
        prog = _program(session, program)
        cache: dict[int, list[str]] = {}
        rows = [
            requirements.read_requirement(session, r, level_stale=cache)
            for r in requirements.list_requirements(session, program_id=prog.id)
        ]
    if as_json:
        emit_json(rows)
    else:
        table(
            ["key", "version", "method", "level id", "status", "reason"],
            [(r.key, r.version, r.method.value, r.level_id, r.status, r.status_reason)
             for r in rows],
        )


def _req(session, program: str | None, ref: str):
    prog = _program(session, program) if program else None
    return requirements.requirement_ref(session, prog, ref)


@req_app.command("point")
def req_point(
    requirement: str,
    level: int,
    expected_version: Annotated[int, typer.Option(help="Version you edited.")],
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Point a requirement at another level."""
    with work(db) as session:
        req = _req(session, program, requirement)
        requirements.update_requirement(
            session,
            local_actor(),
            req.id,
            s.RequirementUpdate(level_id=level, expected_version=expected_version),
        )
    typer.echo(f"requirement {requirement} now points at level {level}")


@evidence_app.command("analysis")
def evidence_analysis(
    requirement: str,
    applied: Annotated[float, typer.Option(help="Applied value [units].")],
    allowable: Annotated[float, typer.Option(help="Allowable [units].")],
    units: Annotated[str, typer.Option(help="Units of both values.")],
    factor_of_safety: float = 1.0,
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Record an analysis result; the margin of safety is computed."""
    with work(db) as session:
        req = _req(session, program, requirement)
        ev = evidence.add_analysis(
            session,
            local_actor(),
            req.id,
            s.AnalysisEvidenceIn(
                applied=applied,
                allowable=allowable,
                units=units,
                factor_of_safety=factor_of_safety,
                note=note,
            ),
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}; {ev.summary['reason']}")


@evidence_app.command("test")
def evidence_test(
    requirement: str,
    file: Annotated[
        Path, typer.Option("--file", help="Achieved spectrum: CSV (Hz, value) or JSON.")
    ],
    units: UnitsOption = None,
    duration_s: Annotated[float | None, typer.Option(help="Achieved test duration [s].")] = None,
    shocks: Annotated[int | None, typer.Option(help="Shocks applied.")] = None,
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Record a test record; it is checked against the level's tolerances."""
    with work(db) as session:
        req = _req(session, program, requirement)
        if req.level is None:
            raise CliError(f"requirement {req.key} points at no level")
        ev = evidence.add_test_record_file(
            session,
            local_actor(),
            req.id,
            file.name,
            _read_file(file),
            value_units=units,
            duration_s=duration_s,
            shocks=shocks,
            note=note,
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}; {ev.summary['reason']}")


@evidence_app.command("similarity")
def evidence_similarity(
    requirement: str,
    similar_to: Annotated[str, typer.Option(help="Verified requirement.")],
    rationale: Annotated[str, typer.Option(help="Why it is similar.")],
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Claim similarity to another verified requirement."""
    with work(db) as session:
        req = _req(session, program, requirement)
        other = _req(session, None, similar_to)
        ev = evidence.add_similarity(
            session,
            local_actor(),
            req.id,
            s.SimilarityEvidenceIn(similar_requirement_id=other.id, rationale=rationale),
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}; {ev.summary['reason']}")


@evidence_app.command("inspection")
def evidence_inspection(
    requirement: str,
    note: Annotated[str, typer.Option(help="Finding.")],
    failed: Annotated[bool, typer.Option("--failed", help="The inspection failed.")] = False,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Record an inspection."""
    with work(db) as session:
        req = _req(session, program, requirement)
        ev = evidence.add_inspection(
            session, local_actor(), req.id, s.InspectionEvidenceIn(passed=not failed, note=note)
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}")


@app.command("waive")
def waive(
    requirement: str,
    rationale: Annotated[str, typer.Option(help="Why.")],
    # No policy allows more than WAIVER_DAYS_LIMIT: refused while parsing, naming --days,
    # before any lookup; the policy's own max_waiver_days is checked by the use case.
    days: Annotated[int, typer.Option(min=1, max=s.WAIVER_DAYS_LIMIT,
                                      help="Days until the waiver expires (at most "
                                      "the policy's max_waiver_days, 365 by default).")] = 30,
    request: Annotated[int | None, typer.Option(
        help="The waiver request answered (default: the newest unanswered one).")] = None,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Waive a requirement (an approver's decision) until it expires. Under the policy's
    two-person rule (qualification by default) the approver (QUALPLAN_ACTOR) is neither
    an author of the evidence nor the requester."""
    with work(db) as session:
        req = _req(session, program, requirement)
        w = requirements.waive(
            session,
            local_actor(),
            req.id,
            s.WaiverIn(rationale=rationale, expires_at=datetime.now(UTC) + timedelta(days=days),
                       request_id=request),
        )
    bare = " (it has NO evidence: an admin's waiver)" if w.without_evidence else ""
    typer.echo(f"requirement {requirement} waived by {w.approver} until "
               f"{w.expires_at:%Y-%m-%d}{bare}")


@app.command("request-waiver")
def request_waiver(
    requirement: str,
    reason: Annotated[str, typer.Option(help="Why the requirement should be waived.")],
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Ask that a requirement be waived; an approver other than you decides."""
    with work(db) as session:
        req = _req(session, program, requirement)
        row = approvals.request_waiver(session, local_actor(), req.id,
                                       s.WaiverRequestIn(reason=reason))
    typer.echo(f"waiver request {row.id} for {requirement} recorded (by {row.requested_by})")


@app.command("audit")
def audit_command(
    program: ProgramOption = None,
    product: Annotated[
        str | None, typer.Option(help="Audit this product and its children only.")
    ] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Margin-closure audit. Exits 0 only when every requirement is verified or waived."""
    with work(db) as session:
        if product is not None and program is None:
            prod = catalog.product_ref(session, None, product)
            prog_id = prod.program_id
        else:
            prog = _program(session, program)
            prog_id = prog.id
            prod = catalog.product_ref(session, prog, product) if product else None
        report = audit.audit(session, prog_id, prod.id if prod else None)
    if as_json:
        emit_json(report)
    else:
        typer.echo(
            f"audit of {report.scope} ({report.program}), {report.generated_at:%Y-%m-%d %H:%M} UTC"
        )
        typer.echo("  ".join(f"{k} {v}" for k, v in report.counts.items()))
        table(
            ["key", "product", "level", "method", "status", "required margin",
             "achieved margin", "unit", "reason"],
            [
                (
                    i.key,
                    i.product,
                    i.level,
                    i.method.value,
                    i.status,
                    i.required_margin,
                    i.achieved_margin,
                    i.margin_unit or "-",
                    i.reason,
                )
                for i in report.items
            ],
        )
        typer.echo("margins by cause (achieved margin: analysis MS, or the achieved record "
                   "over the limit level with the time compression excluded):")
        table(["key", *margins.COLUMNS],
              [(i.key, *margins.cells(i.margins)) for i in report.items])
        typer.echo(report.verdict)
    if not report.release_ready:
        raise typer.Exit(1)
