"""Environments: upload on a product, the environment's page (plot, history, comparison),
new revisions and the breakpoint table of a revision."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import approvals, catalog, environments, impact, imports, records
from qualplan.planning import schemas as s
from qualplan.planning.errors import PlanningError, ValidationFailed
from qualplan.reports import charts, tables
from qualplan.web import plots
from qualplan.web.common import (
    Ctx,
    CtxDep,
    _slug,
    action,
    csv_response,
    form_of,
    message_of,
    more_files,
    number,
    page,
    problem_page,
    record_file_of,
    render,
    svg_response,
    text,
)
from qualplan.web.programs import product_page

router = APIRouter(include_in_schema=False)


def _reading(form) -> s.FileReading:
    return s.FileReading(value_units=text(form, "value_units") or None,
                         freq_units=text(form, "freq_units") or "Hz",
                         sample_rate_hz=number(form, "sample_rate_hz"), **_exposure(form))


def _exposure(form) -> dict:
    return {"share": number(form, "share"), "duration_s": number(form, "duration_s"),
            "count": number(form, "count", integer=True)}


def _record_reading(form) -> records.RecordReading:
    return records.RecordReading(unit=text(form, "value_units") or None,
                                 fs_hz=number(form, "sample_rate_hz"),
                                 calibration=number(form, "calibration"),
                                 variable=text(form, "variable") or None,
                                 dataset=text(form, "dataset") or None)


async def _form(ctx: Ctx, request: Request, again):
    try:
        return await form_of(request, keep_records=True)
    except PlanningError as exc:
        return None, problem_page(ctx, 413, "File too large",
                                  f"Not saved: {message_of(exc)}. Go back to the form and "
                                  "choose a smaller file.")


@router.post("/products/{product_id}/environments")
async def upload_environment(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    def again(msg, code, form=None):
        return product_page(ctx, product_id, msg, code, form or {}, "upload")

    form, files = await _form(ctx, request, again)
    if form is None:
        return files

    def do() -> str:
        if text(form, "channel_axes"):  # a long record, stored in chunks
            records.refuse_exposure(_exposure(form))
            if text(form, "kind") != "time_history":
                raise ValidationFailed("channel_axes", text(form, "channel_axes"),
                                       "is for a record: choose the kind time history")
            filename, stream = record_file_of(form)
            rec = records.import_record_upload(
                ctx.db, ctx.actor, records.RecordImport(
                    product_id=product_id, phase_id=number(form, "phase_id", integer=True),
                    name=text(form, "name"), channel_axes=records.parse_axes(
                        text(form, "channel_axes")), source=text(form, "source"),
                    provenance=text(form, "provenance") or f"uploaded file {filename}",
                    note=text(form, "note")), filename, stream, _record_reading(form))
            return f"/environments/{rec.environment_id}"
        filename, content = files.get("file", ("", b""))
        env = environments.create_environment_from_file(ctx.db, ctx.actor, s.EnvironmentFromFile(
            product_id=product_id, phase_id=number(form, "phase_id", integer=True),
            name=text(form, "name"), kind=text(form, "kind"), axis=text(form, "axis"),
            source=text(form, "source"), provenance=text(form, "provenance"),
            note=text(form, "note"), reading=_reading(form)), filename, content,
            more_files=more_files(files, "file"))
        return f"/environments/{env.id}"

    return await run_in_threadpool(action, ctx, form, do,
                                   lambda msg, code: again(msg, code, form))


# --- an environment: plot, history, comparison, new revision -----------------------------


def environment_page(ctx: Ctx, env_id: int, error=None, status=200, form=None):
    env = environments.environment_by_id(ctx.db, env_id)
    hist = environments.history(ctx.db, env.id)
    q = ctx.request.query_params
    comparison, compare_plot, compare_error, compare_diff = None, None, None, None
    if q.get("a") and q.get("b"):
        try:
            a, b = int(q["a"]), int(q["b"])
            comparison = environments.compare(ctx.db, env.id, a, b)
            pair = [r for r in hist if r.number in (a, b)]
            compare_plot = plots.environment_plot(env, sorted(pair, key=lambda r: r.number))
            compare_diff = plots.difference_plot(env, environments.revision(ctx.db, env.id, a),
                                                 environments.revision(ctx.db, env.id, b))
        except (ValueError, PlanningError) as exc:
            compare_error = message_of(exc)
    diff = None
    if len(hist) >= 2 and env.kind in plots.QUANTITY:
        diff = plots.difference_plot(
            env, environments.revision(ctx.db, env.id, hist[-2].number),
            environments.revision(ctx.db, env.id, hist[-1].number))
    product = catalog.product_by_id(ctx.db, env.product_id)
    return render(
        ctx, "web/environment.html", status, env=env, product=product, history=hist,
        latest=hist[-1] if hist else None, plot=plots.environment_plot(env, hist),
        record_plots=plots.record_plots(env, env.revisions[-1] if env.revisions else None),
        comparison=comparison, compare_plot=compare_plot, compare_error=compare_error,
        compare_diff=compare_diff, diff_plot=diff,
        value_units=sorted(imports.VALUE_UNITS[env.kind]), error=error, form=form or {},
        read=environments.read_environment(ctx.db, env, with_warnings=True),
    )


@router.get("/environments/{env_id}")
def environment(env_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: environment_page(ctx, env_id))


@router.get("/environments/{env_id}/plot.svg")
def environment_svg(env_id: int, ctx: Ctx = CtxDep) -> Response:
    """The revisions overlay with the dB difference under it, as SVG (reports.charts):
    the latest revisions as on the page, or revisions ``a`` and ``b`` of a comparison."""
    def build() -> Response:
        env = environments.environment_by_id(ctx.db, env_id)
        if env.kind not in plots.QUANTITY:
            raise ValidationFailed("environment", env.name,
                                   f"is a {env.kind.value.replace('_', ' ')}: it has no "
                                   "revisions overlay")
        hist = environments.history(ctx.db, env.id)
        q = ctx.request.query_params
        if q.get("a") or q.get("b"):
            nums = []
            for key in ("a", "b"):
                raw = q.get(key, "")
                if not raw.isdigit():
                    raise ValidationFailed(key, raw, "give a revision number")
                nums.append(int(raw))
            pair = [r for r in hist if r.number in nums]
            if len(pair) != 2:
                raise ValidationFailed("a/b", nums, f"{env.name} has revisions 1 to "
                                       f"{len(hist)}; give two different ones")
            shown, (ra, rb) = sorted(pair, key=lambda r: r.number), nums
        else:
            shown, ra, rb = hist, None, None
            if len(hist) >= 2:
                ra, rb = hist[-2].number, hist[-1].number
        main = plots.environment_plot(env, shown)
        diff = (plots.difference_plot(env, environments.revision(ctx.db, env.id, ra),
                                      environments.revision(ctx.db, env.id, rb))
                if ra is not None else None)
        suffix = f"-r{ra}-r{rb}" if q.get("a") else ""
        return svg_response(charts.plot_chart(main, diff),
                            f"{_slug(env.name)}-revisions{suffix}.svg")

    return page(ctx, build)


@router.get("/environments/{env_id}/impact")
def environment_impact(env_id: int, ctx: Ctx = CtxDep) -> Response:
    """What a new revision of the environment would make stale (or has made stale)."""
    def build() -> Response:
        env = environments.environment_by_id(ctx.db, env_id)
        return render(ctx, "web/environment_impact.html", env=env,
                      product=catalog.product_by_id(ctx.db, env.product_id),
                      impact=impact.environment_impact(ctx.db, env_id))

    return page(ctx, build)


@router.post("/environments/{env_id}/revisions")
async def revise_environment(env_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    def again(msg, code, form=None):
        return environment_page(ctx, env_id, msg, code, form or {})

    form, files = await _form(ctx, request, again)
    if form is None:
        return files

    def do() -> str:
        if text(form, "channel_axes"):  # a long record, stored in chunks
            records.refuse_exposure(_exposure(form))
            filename, stream = record_file_of(form)
            records.import_record_upload(
                ctx.db, ctx.actor, records.RecordImport(
                    environment_id=env_id,
                    expected_revision=number(form, "expected_revision", integer=True),
                    channel_axes=records.parse_axes(text(form, "channel_axes")),
                    note=text(form, "note")), filename, stream, _record_reading(form))
            return f"/environments/{env_id}"
        filename, content = files.get("file", ("", b""))
        environments.revise_environment_from_file(
            ctx.db, ctx.actor, env_id, filename, content, _reading(form),
            note=text(form, "note"),
            expected_revision=number(form, "expected_revision", integer=True),
            more_files=more_files(files, "file"))
        return f"/environments/{env_id}"

    return await run_in_threadpool(action, ctx, form, do,
                                   lambda msg, code: again(msg, code, form))


@router.post("/environments/{env_id}/withdrawal")
async def withdraw_environment(env_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        approvals.withdraw_environment(ctx.db, ctx.actor, env_id, text(form, "reason"))
        return f"/environments/{env_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: environment_page(
        ctx, env_id, msg, code, form))


@router.get("/environments/{env_id}/revisions/{number}.csv")
def revision_csv(env_id: int, number: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        env = environments.environment_by_id(ctx.db, env_id)
        rev = environments.revision(ctx.db, env.id, number)
        body = tables.revision_csv(env.kind.value, env.name, rev.number, rev.spec)
        if body is None:
            return problem_page(ctx, 400, "No table", "a time history has no breakpoint table")
        rows: list = []
        return csv_response(rows, f"{_slug(env.name)}-r{rev.number}.csv", body=body)

    return page(ctx, build)
