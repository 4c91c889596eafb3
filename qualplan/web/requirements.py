"""Requirements and evidence: the traceability matrix, a requirement's page with its
evidence and waivers, and the release audit."""

from __future__ import annotations

from datetime import UTC, datetime, time

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import (
    approvals,
    audit,
    catalog,
    evidence,
    imports,
    levels,
    margins,
    requirements,
)
from qualplan.planning import schemas as s
from qualplan.planning.errors import ValidationFailed
from qualplan.reports import charts
from qualplan.web import plots
from qualplan.web.common import (
    Ctx,
    CtxDep,
    _or,
    _slug,
    action,
    csv_response,
    form_of,
    number,
    page,
    render,
    svg_response,
    text,
)

router = APIRouter(include_in_schema=False)


# --- requirements: the traceability matrix --------------------------------------------------

SORTS = s.TraceSort.__args__


def matrix_of(ctx: Ctx, program_id: int) -> list[s.TraceRow]:
    """The program's traceability matrix with the filters and order of the query."""
    q = ctx.request.query_params
    product = q.get("product")
    return requirements.traceability(
        ctx.db, program_id, status=q.get("status") or None, method=q.get("method") or None,
        product_id=int(product) if product and product.isdigit() else None,
        text=q.get("q") or None, sort=q.get("sort") if q.get("sort") in SORTS else "key",
        descending=q.get("dir") == "desc")


def matrix_page(ctx: Ctx, program_id: int, error=None, status=200, form=None):
    program = catalog.program_by_id(ctx.db, program_id)
    products = catalog.list_products(ctx.db, program.id)
    all_levels = [lv for p in products for lv in levels.list_levels(ctx.db, p.id)]
    return render(
        ctx, "web/requirements.html", status, program=program,
        rows=matrix_of(ctx, program.id), q=ctx.request.query_params, sorts=SORTS,
        statuses=s.Status.__args__, methods=list(s.VerificationMethod), products=products,
        levels=all_levels, error=error, form=form or {},
    )


@router.get("/programs/{program_id}/requirements")
def matrix(program_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: matrix_page(ctx, program_id))


@router.get("/programs/{program_id}/requirements.csv")
def matrix_csv(program_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        program = catalog.program_by_id(ctx.db, program_id)
        rows = [["key", "requirement", "product", "level", "method", "evidence", "verdict",
                 "status", "reason"]]
        comments = [f"traceability of program {program.name}"]
        for r in matrix_of(ctx, program.id):
            req = r.requirement
            rows.append([req.key, req.text, r.product, r.level, req.method.value,
                         f"{r.evidence_kind.value} {r.evidence_id}" if r.evidence_id else "",
                         r.evidence_verdict.value if r.evidence_id else "", req.status,
                         req.status_reason])
        return csv_response(rows, f"{_slug(program.name)}-traceability.csv", comments)

    return page(ctx, build)


@router.post("/programs/{program_id}/requirements")
async def create_requirement(program_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        req = requirements.create_requirement(ctx.db, ctx.actor, s.RequirementCreate(
            program_id=program_id, key=text(form, "key"), text=text(form, "text"),
            product_id=number(form, "product_id", integer=True, required=True),
            level_id=number(form, "level_id", integer=True),
            method=text(form, "method"),
            acceptance_criterion=text(form, "acceptance_criterion"),
            required_margin=number(form, "required_margin") or 0.0))
        return f"/requirements/{req.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: matrix_page(
        ctx, program_id, msg, code, form))


# --- a requirement: evidence and waivers ------------------------------------------------------


def requirement_page(ctx: Ctx, req_id: int, error=None, status=200, form=None, where=None):
    req = requirements.requirement_by_id(ctx.db, req_id)
    read = requirements.read_requirement(ctx.db, req)
    units = sorted(imports.VALUE_UNITS[req.level.kind]) if req.level else []
    return render(
        ctx, "web/requirement.html", status, req=req, read=read,
        evidence=list(reversed(evidence.list_evidence(ctx.db, req.id))), waivers=req.waivers,
        waiver_requests=approvals.waiver_requests(ctx.db, req.id),
        value_units=units, error=error, where=where, form=form or {},
    )


@router.get("/requirements/{req_id}")
def requirement(req_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: requirement_page(ctx, req_id))


@router.post("/requirements/{req_id}/test-records")
async def add_test_record(req_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, files = await form_of(request)

    def do() -> str:
        filename, content = files.get("file", ("", b""))
        if not filename:
            raise ValidationFailed("file", None, "choose the test record to upload")
        evidence.add_test_record_file(
            ctx.db, ctx.actor, req_id, filename, content,
            value_units=text(form, "value_units") or None,
            duration_s=number(form, "duration_s"),
            shocks=number(form, "shocks", integer=True), note=text(form, "note"))
        return f"/requirements/{req_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: requirement_page(
        ctx, req_id, msg, code, form, "test"))


@router.post("/requirements/{req_id}/analyses")
async def add_analysis(req_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        evidence.add_analysis(ctx.db, ctx.actor, req_id, s.AnalysisEvidenceIn(
            applied=number(form, "applied", required=True),
            allowable=number(form, "allowable", required=True),
            units=text(form, "units"),
            factor_of_safety=_or(number(form, "factor_of_safety"), 1.0),
            note=text(form, "note")))
        return f"/requirements/{req_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: requirement_page(
        ctx, req_id, msg, code, form, "analysis"))


@router.post("/requirements/{req_id}/waivers")
async def waive(req_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        raw = text(form, "expires_on")
        try:
            day = datetime.strptime(raw, "%Y-%m-%d").date()
        except ValueError as exc:
            raise ValidationFailed("expires_on", raw, "give a date as YYYY-MM-DD") from exc
        requirements.waive(ctx.db, ctx.actor, req_id, s.WaiverIn(
            rationale=text(form, "rationale"),
            expires_at=datetime.combine(day, time(23, 59, 59), tzinfo=UTC)))
        return f"/requirements/{req_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: requirement_page(
        ctx, req_id, msg, code, form, "waive"))


@router.post("/requirements/{req_id}/waiver-requests")
async def request_waiver(req_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        approvals.request_waiver(ctx.db, ctx.actor, req_id,
                                 s.WaiverRequestIn(reason=text(form, "reason")))
        return f"/requirements/{req_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: requirement_page(
        ctx, req_id, msg, code, form, "request"))


# --- the audit ---------------------------------------------------------------------------------


@router.get("/programs/{program_id}/audit")
def audit_page(program_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        product_id = ctx.request.query_params.get("product")
        report = audit.audit(ctx.db, program_id,
                             int(product_id) if product_id and product_id.isdigit() else None)
        program = catalog.program_by_id(ctx.db, program_id)
        return render(ctx, "web/audit.html", report=report, program=program,
                      products=catalog.list_products(ctx.db, program_id),
                      product_id=product_id or "", margin_columns=margins.COLUMNS,
                      margin_cells={i.key: margins.cells(i.margins) for i in report.items})

    return page(ctx, build)


@router.get("/programs/{program_id}/audit.csv")
def audit_csv(program_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        report = audit.audit(ctx.db, program_id)
        rows = [["key", "product", "level", "method", "status", "required_margin",
                 "achieved_margin", "shortfall", "margin_unit", "reason", *margins.COLUMNS]]
        for i in report.items:
            rows.append([i.key, i.product, i.level or "", i.method.value, i.status,
                         i.required_margin, "" if i.achieved_margin is None else i.achieved_margin,
                         "" if i.shortfall is None else i.shortfall,
                         i.margin_unit, i.reason, *margins.cells(i.margins)])
        comments = [f"margin-closure audit of program {report.program}", report.verdict,
                    "margins: dB for a test, MS (margin of safety) for an analysis"]
        return csv_response(rows, f"{_slug(report.program)}-audit.csv", comments)

    return page(ctx, build)


# --- evidence: a test record over its level and tolerance band -------------------------------


@router.get("/evidence/{evidence_id}")
def evidence_page(evidence_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        overlay = evidence.record_overlay(ctx.db, evidence_id)
        req = requirements.requirement_by_id(ctx.db, overlay.requirement_id)
        return render(ctx, "web/evidence.html", overlay=overlay, req=req,
                      plot=plots.record_plot(overlay))

    return page(ctx, build)


@router.get("/evidence/{evidence_id}/plot.svg")
def evidence_svg(evidence_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        overlay = evidence.record_overlay(ctx.db, evidence_id)
        return svg_response(charts.record_chart(overlay),
                            f"{_slug(overlay.requirement_key)}-record-{evidence_id}.svg")

    return page(ctx, build)
