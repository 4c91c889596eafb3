"""Levels: derive one on a product, the level's page (plot, verdicts, coverage) and its
breakpoint table."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import (
    approvals,
    catalog,
    coverage,
    documents,
    jobs,
    levels,
    notching,
    transfers,
    wording,
)
from qualplan.planning import schemas as s
from qualplan.planning.errors import NotFound, ValidationFailed
from qualplan.reports import charts, tables
from qualplan.web import plots
from qualplan.web.common import (
    Ctx,
    CtxDep,
    _or,
    _slug,
    action,
    form_of,
    number,
    page,
    render,
    svg_response,
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
    force_limit = transfers.level_force_limit(ctx.db, row.id)
    notched = notching.level_notching(ctx.db, row.id)
    return render(
            ctx, "web/level.html", status, level=row, read=read, product=product,
            error=error, form=form or {},
            steps=[wording.step_sentence(st, grade=row.grade.value if row.grade else None,
                                         policy=row.policy.name if row.policy else None)
                   for st in read.result.steps],
            plot=plots.level_plot(read, levels.compressed_inputs(ctx.db, row), notching=notched,
                                  force_limit=force_limit)
            if row.kind in plots.QUANTITY else None,
            coverage=plots.coverage_plots(read), worst=plots.worst_margins(read),
            cov=read.result.coverage,
            force_limit=force_limit, notched=notched,
        )


@router.get("/levels/{level_id}")
def level(level_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: level_page(ctx, level_id))


def _level_plots(ctx: Ctx, level_id: int):
    row = levels.level_by_id(ctx.db, level_id)
    read = levels.read_level(ctx.db, row)
    return row, read


@router.get("/levels/{level_id}/plot.svg")
def level_svg(level_id: int, ctx: Ctx = CtxDep) -> Response:
    """The level with its tolerance band, limit and compressed inputs, as SVG."""
    def build() -> Response:
        row, read = _level_plots(ctx, level_id)
        spec = plots.level_plot(read, levels.compressed_inputs(ctx.db, row))
        return svg_response(charts.plot_chart(spec),
                            f"{_slug(row.name)}-{row.number}-level.svg")

    return page(ctx, build)


@router.get("/levels/{level_id}/coverage-{n}.svg")
def level_coverage_svg(level_id: int, n: int, ctx: Ctx = CtxDep) -> Response:
    """Plot `n` (1: FDS ratio, 2: ERS with the over-test ceiling, 3: ERS ratio) of the
    level's coverage of the life, as SVG."""
    def build() -> Response:
        row, read = _level_plots(ctx, level_id)
        specs = plots.coverage_plots(read)
        if not 1 <= n <= len(specs):
            raise NotFound(f"coverage plot of {row.name} #{row.number}", n)
        return svg_response(charts.plot_chart(specs[n - 1]),
                            f"{_slug(row.name)}-{row.number}-coverage-{n}.svg")

    return page(ctx, build)


# --- a product's test sequence against its life, per axis ------------------------------------


def _grade(ctx: Ctx) -> s.Grade:
    raw = ctx.request.query_params.get("grade") or "qualification"
    try:
        return s.Grade(raw)
    except ValueError as exc:
        raise ValidationFailed("grade", raw, "must be one of " + ", ".join(
            g.value for g in s.Grade)) from exc


@router.get("/products/{product_id}/coverage")
def sequence_page(product_id: int, ctx: Ctx = CtxDep) -> Response:
    """FDS and ERS of the product's test sequence (its current test levels of one grade)
    against the life of each axis, with the over-test ceiling."""
    def build() -> Response:
        product = catalog.product_by_id(ctx.db, product_id)
        grade = _grade(ctx)
        axes = [{"axis": x.axis, "tests": x.tests, "cov": x.coverage,
                 "plots": plots.coverage_plots_of(x.coverage, "test sequence"),
                 "worst": plots.worst_margins_of(x.coverage)}
                for x in coverage.product_sequence(ctx.db, product.id, grade)]
        return render(ctx, "web/sequence.html", product=product, grade=grade.value,
                      grades=list(s.Grade), axes=axes)

    return page(ctx, build)


@router.get("/products/{product_id}/coverage/{axis}-{n}.svg")
def sequence_svg(product_id: int, axis: str, n: int, ctx: Ctx = CtxDep) -> Response:
    """Plot `n` of the test sequence's coverage of axis `axis` (as on the page), as SVG."""
    def build() -> Response:
        product = catalog.product_by_id(ctx.db, product_id)
        grade = _grade(ctx)
        seq = {x.axis: x for x in coverage.product_sequence(ctx.db, product.id, grade)}
        if axis not in seq:
            raise NotFound(f"current {grade.value} test level of {product.name} on axis", axis)
        specs = plots.coverage_plots_of(seq[axis].coverage, "test sequence")
        if not 1 <= n <= len(specs):
            raise NotFound(f"coverage plot of axis {axis}", n)
        return svg_response(charts.plot_chart(specs[n - 1]),
                            f"{_slug(product.name)}-{grade.value}-{axis}-coverage-{n}.svg")

    return page(ctx, build)


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
