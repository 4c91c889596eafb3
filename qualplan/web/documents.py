"""PDF previews of the documents (rendered by the renderer the composition module gives)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from fastapi import APIRouter
from fastapi.responses import Response

from qualplan.planning import schemas as s
from qualplan.reports import file_stem
from qualplan.web.common import Ctx, CtxDep, page, problem_page

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
    from qualplan.planning import documents

    if grade not in {g.value for g in s.Grade}:
        return page(ctx, lambda: problem_page(ctx, 400, "No such grade", f"grade {grade!r}"))
    return page(ctx, lambda: pdf_response(
        ctx, lambda: documents.specification_content(ctx.db, product_id, grade,
                                                     preview=True)))


@router.get("/programs/{program_id}/audit.pdf")
def audit_pdf(program_id: int, ctx: Ctx = CtxDep):
    from qualplan.planning import documents

    return page(ctx, lambda: pdf_response(
        ctx, lambda: documents.audit_content(ctx.db, program_id, preview=True)))
