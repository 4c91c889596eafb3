"""Levels: derive one on a product, the level's page (plot, verdicts, coverage) and its
breakpoint table."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import (
    approvals,
    catalog,
    documents,
    jobs,
    levels,
    notching,
    transfers,
    wording,
)
from qualplan.planning import schemas as s
from qualplan.reports import tables
from qualplan.web import plots
from qualplan.web.common import (
    Ctx,
    CtxDep,
    _or,
    action,
    form_of,
    number,
    page,
    render,
    text,
)
from qualplan.web.programs import product_page

router = APIRouter(include_in_schema=False)


@router.post("/products/{product_id}/levels")
async def derive_level(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        ids = [int(v) for v in form.getlist("revision_ids") if str(v).isdigit()]
        recipe = s.LevelRecipe(
            product_id=product_id, name=text(form, "name"),
            purpose=text(form, "purpose") or "test", grade=text(form, "grade") or "qualification",
            kind=text(form, "kind"), axis=text(form, "axis"), revision_ids=ids,
            combination=text(form, "combination") or "envelope",
            max_breakpoints=_or(number(form, "max_breakpoints", integer=True), 12),
            policy_id=number(form, "policy_id", integer=True, required=True),
            load_factor_fn_hz=number(form, "load_factor_fn_hz"),
            analysis=s.RecordAnalysis(
                window=text(form, "window") or "hann",
                resolution_hz=number(form, "resolution_hz"),
                segment_s=number(form, "segment_s"),
                overlap=_or(number(form, "overlap"), 0.5),
                maximax_window_s=number(form, "maximax_window_s")),
        )
        if form.get("as_job"):
            runner = request.app.state.jobs
            job = jobs.submit_derivation(ctx.db, ctx.actor, recipe, runner=runner.name)
            job_id = job.id
            jobs.after_commit(ctx.db, lambda: runner.dispatch(job_id))
            return f"/jobs/{job_id}"
        level = levels.derive_level(ctx.db, ctx.actor, recipe)
        return f"/levels/{level.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: product_page(
        ctx, product_id, msg, code, form, "derive"))


# --- levels --------------------------------------------------------------------------------


def level_page(ctx: Ctx, level_id: int, error=None, status=200, form=None) -> Response:
    row = levels.level_by_id(ctx.db, level_id)
    read = levels.read_level(ctx.db, row)
    product = catalog.product_by_id(ctx.db, row.product_id)
    return render(
            ctx, "web/level.html", status, level=row, read=read, product=product,
            error=error, form=form or {},
            steps=[wording.step_sentence(st, grade=row.grade.value if row.grade else None,
                                         policy=row.policy.name if row.policy else None)
                   for st in read.result.steps],
            plot=plots.level_plot(read, levels.compressed_inputs(ctx.db, row))
            if row.kind in plots.QUANTITY else None,
            coverage=plots.coverage_plots(read), worst=plots.worst_margins(read),
            cov=read.result.coverage,
            force_limit=transfers.level_force_limit(ctx.db, row.id),
            notched=notching.level_notching(ctx.db, row.id),
        )


@router.get("/levels/{level_id}")
def level(level_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: level_page(ctx, level_id))


@router.post("/levels/{level_id}/withdrawal")
async def withdraw_level(level_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        approvals.withdraw_level(ctx.db, ctx.actor, level_id, text(form, "reason"))
        return f"/levels/{level_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: level_page(
        ctx, level_id, msg, code, form))


@router.get("/levels/{level_id}/rederive")
def rederive_preview(level_id: int, ctx: Ctx = CtxDep) -> Response:
    """What re-deriving would change (per breakpoint and overall, in dB); nothing stored."""
    def build() -> Response:
        row = levels.level_by_id(ctx.db, level_id)
        diff = levels.rederive_level(ctx.db, ctx.actor, level_id, store=False)
        product = catalog.product_by_id(ctx.db, row.product_id)
        return render(ctx, "web/rederive.html", level=row, product=product, diff=diff)

    return page(ctx, build)


@router.post("/levels/{level_id}/rederive")
async def rederive(level_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        diff = levels.rederive_level(ctx.db, ctx.actor, level_id, store=True)
        return f"/levels/{diff.new_level_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: level_page(
        ctx, level_id, msg, code, form))


@router.get("/levels/{level_id}/breakpoints.csv")
def level_csv(level_id: int, ctx: Ctx = CtxDep) -> Response:
    """The level's breakpoint table in the one export format (reports.tables)."""
    def build() -> Response:
        export = documents.level_export(ctx.db, level_id)
        return Response(
            tables.level_export_csv(export), media_type="text/csv; charset=utf-8",
            headers={"Content-Disposition":
                     f'attachment; filename="{tables.level_file_stem(export)}.csv"'})

    return page(ctx, build)
