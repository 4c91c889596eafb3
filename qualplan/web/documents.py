"""PDF previews of the documents (rendered by the renderer the composition module gives)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import approvals, documents, jobs
from qualplan.planning import schemas as s
from qualplan.reports import file_stem
from qualplan.serving import job_folder
from qualplan.web.common import (
    Ctx,
    CtxDep,
    action,
    form_of,
    number,
    page,
    problem_page,
    render,
    text,
)
from qualplan.web.programs import product_page

router = APIRouter(include_in_schema=False)


# --- PDF documents (rendered by the renderer the composition module gives) -----------------


def pdf_response(ctx: Ctx, make_content: Callable[[], Any]) -> Response:
    if ctx.web.pdf is None:
        return problem_page(ctx, 404, "No PDF here",
                            "this service was started without the PDF renderer")
    content = make_content()
    name = f"{file_stem(content)}.pdf"
    return Response(ctx.web.pdf(content), media_type="application/pdf",
                    headers={"Content-Disposition": f'attachment; filename="{name}"',
                             "Cache-Control": "no-store"})


@router.get("/products/{product_id}/specification.pdf")
def specification_pdf(product_id: int, ctx: Ctx = CtxDep, grade: str = "qualification"):
    """The test-level specification of the product for one grade (a preview: issuing it
    is done with ``qualplan`` or the API, which record the revision)."""
    if grade not in {g.value for g in s.Grade}:
        return page(ctx, lambda: problem_page(ctx, 400, "No such grade", f"grade {grade!r}"))
    return page(ctx, lambda: pdf_response(
        ctx, lambda: documents.specification_content(ctx.db, product_id, grade,
                                                     preview=True)))


@router.get("/programs/{program_id}/audit.pdf")
def audit_pdf(program_id: int, ctx: Ctx = CtxDep):
    return page(ctx, lambda: pdf_response(
        ctx, lambda: documents.audit_content(ctx.db, program_id, preview=True)))


# --- issuing a document, as a job ----------------------------------------------------------


def _issue_job(request: Request, ctx: Ctx, **fields) -> str:
    """Queue the issue of a document (its revision is recorded by the job) and go to the
    job's page, which follows its progress and links its files."""
    runner = request.app.state.jobs
    job = jobs.submit_document(ctx.db, ctx.actor,
                               jobs.DocumentJob(out_dir=job_folder(request), **fields),
                               runner=runner.name)
    job_id = job.id
    jobs.after_commit(ctx.db, lambda: runner.dispatch(job_id))
    return f"/jobs/{job_id}"


@router.post("/products/{product_id}/specification")
async def issue_specification(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    """Issue the product's test-level specification for a grade (default baseline; stale
    or unconverged levels refused by the job, with the reasons on its page)."""
    form, _ = await form_of(request)

    def do() -> str:
        return _issue_job(request, ctx, document="specification", product_id=product_id,
                          grade=text(form, "grade") or "qualification",
                          number=text(form, "number") or None, note=text(form, "note"))

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: product_page(
        ctx, product_id, msg, code, form, "issue"))


@router.post("/programs/{program_id}/audit")
async def issue_audit(program_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    """Issue the margin-closure audit report of the program (or of one product and its
    children)."""
    form, _ = await form_of(request)

    def do() -> str:
        return _issue_job(request, ctx, document="audit", program_id=program_id,
                          product_id=number(form, "product_id", integer=True),
                          number=text(form, "number") or None, note=text(form, "note"))

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: problem_page(
        ctx, code, "The audit report was not issued", msg))


# --- issued documents and their sign-off -------------------------------------------------


@router.get("/documents")
def document_list(ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        rows = [(d, documents.approvals_of(ctx.db, d.id))
                for d in reversed(documents.list_documents(ctx.db))]
        return render(ctx, "web/documents.html", rows=rows)

    return page(ctx, build)


def document_page(ctx: Ctx, document_id: int, error=None, status=200, form=None) -> Response:
    doc = next((d for d in documents.list_documents(ctx.db) if d.id == document_id), None)
    if doc is None:
        return problem_page(ctx, 404, "Not found", f"document {document_id} not found")
    return render(ctx, "web/document.html", status, doc=doc,
                  approvals=documents.approvals_of(ctx.db, doc.id),
                  level_ids=documents.document_levels(ctx.db, doc.id), error=error,
                  form=form or {})


@router.get("/documents/{document_id}")
def document(document_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: document_page(ctx, document_id))


@router.post("/documents/{document_id}/signoffs")
async def sign(document_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        approvals.sign_document(ctx.db, ctx.actor, document_id, text(form, "role"))
        return f"/documents/{document_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: document_page(
        ctx, document_id, msg, code, form))
