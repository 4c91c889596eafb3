"""A product's analysis page: its modal summaries (upload a table of modes as the next
revision), the peak-response estimates made from them (make one from a summary revision
and a level), and the analysis loads package (PDF preview); an estimate's own page."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import catalog, levels, loads
from qualplan.planning import modal as pm
from qualplan.planning.errors import ValidationFailed
from qualplan.web.common import Ctx, CtxDep, action, form_of, number, page, render, text
from qualplan.web.documents import pdf_response

router = APIRouter(include_in_schema=False)

#: Units of the per-mode columns of an estimate (planning.modal results).
MODE_UNITS = {"srs_g": "SRS at fn [g]", "force_n": "base force [N]",
              "accel_rms_g": "acceleration [g rms]", "force_rms_n": "base force [N rms]",
              "nu0_hz": "zero-crossing rate [Hz]",
              "force_expected_peak_n": "expected peak base force [N]",
              "accel_g": "acceleration [g]", "freq_hz": "frequency [Hz]",
              "in_band": "in the band (1 = yes)"}


def analysis_page(ctx: Ctx, product_id: int, error=None, status=200, form=None, where=None):
    product = catalog.product_by_id(ctx.db, product_id)
    summaries = []
    for sm in pm.list_summaries(ctx.db, product.id):
        revs = [pm.ModalRevisionRead.model_validate(r) for r in pm.history(ctx.db, sm.id)]
        latest = revs[-1] if revs else None
        sums = {a: sum(md["meff_kg"].get(a, 0.0) for md in latest.spec["modes"])
                for a in "XYZ"} if latest else {}
        summaries.append({"summary": pm.read_summary(ctx.db, sm), "revisions": revs,
                          "latest": latest, "sums": sums})
    estimates = [pm.read_estimate(ctx.db, e) for e in pm.list_estimates(ctx.db, product.id)]
    lv = [levels.read_level(ctx.db, x) for x in levels.list_levels(ctx.db, product.id)]
    return render(
        ctx, "web/analysis.html", status, product=product,
        program=catalog.program_by_id(ctx.db, product.program_id), summaries=summaries,
        estimates=estimates, levels=lv,
        analysis_levels=[x for x in lv if x.purpose.value == "analysis"],
        error=error, where=where, form=form or {},
    )


@router.get("/products/{product_id}/analysis")
def analysis(product_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: analysis_page(ctx, product_id))


@router.post("/products/{product_id}/modal-summaries")
async def upload_modal_summary(product_id: int, request: Request, ctx: Ctx = CtxDep
                               ) -> Response:
    form, files = await form_of(request)

    def do() -> str:
        filename, content = files.get("file", ("", b""))
        if not content:
            raise ValidationFailed("file", filename or None, "choose a CSV or JSON table of "
                                   "modes")
        pm.import_modal_summary(
            ctx.db, ctx.actor, product_id, text(form, "name"), filename, content,
            source=text(form, "source"), note=text(form, "note"),
            response_unit=text(form, "response_unit") or None)
        return f"/products/{product_id}/analysis#modal"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: analysis_page(
        ctx, product_id, msg, code, form, "modal"))


@router.post("/products/{product_id}/estimates")
async def make_estimate(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        est = pm.make_estimate(ctx.db, ctx.actor, pm.EstimateIn(
            modal_revision_id=number(form, "modal_revision_id", integer=True, required=True),
            level_id=number(form, "level_id", integer=True, required=True),
            axis=text(form, "axis") or None, duration_s=number(form, "duration_s")))
        return f"/estimates/{est.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: analysis_page(
        ctx, product_id, msg, code, form, "estimate"))


@router.get("/estimates/{estimate_id}")
def estimate(estimate_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        est = pm.read_estimate(ctx.db, pm.estimate_by_id(ctx.db, estimate_id))
        product = catalog.product_by_id(ctx.db, est.product_id)
        rows = est.result.get("modes", [])
        cols = [k for k in (rows[0] if rows else {}) if k not in ("mode", "fn_hz", "zeta",
                                                                  "meff_kg")]
        return render(ctx, "web/estimate.html", est=est, product=product,
                      program=catalog.program_by_id(ctx.db, product.program_id), rows=rows,
                      cols=cols, col_units=MODE_UNITS)

    return page(ctx, build)


@router.get("/products/{product_id}/loads.pdf")
def loads_pdf(product_id: int, ctx: Ctx = CtxDep, axis: str | None = None) -> Response:
    """The analysis loads package of the product (a preview: issuing it is done with
    ``qualplan report loads``, which records the revision)."""
    from qualplan.planning.schemas import Axis

    def make():
        ax = None
        if axis:
            if axis not in {a.value for a in Axis}:
                raise ValidationFailed("axis", axis, "must be X, Y, Z or all")
            ax = Axis(axis)
        return loads.loads_content(ctx.db, product_id, axis=ax)

    return page(ctx, lambda: pdf_response(ctx, make))
