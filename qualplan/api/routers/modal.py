"""Modal summaries (upload a table of modes as a revision) and response estimates."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, File, Form, Response, UploadFile

from qualplan.api.deps import ActorDep, PageDep, ReaderDep, SessionDep
from qualplan.api.models import Page
from qualplan.planning import loads
from qualplan.planning import modal as pm
from qualplan.planning import schemas as s
from qualplan.reports.loads import pdf_bytes as loads_pdf_bytes

router = APIRouter(tags=["modal"])


@router.post("/modal-summaries/upload", status_code=201, response_model=pm.ModalRevisionRead)
def upload_modal_summary(
    session: SessionDep,
    actor: ActorDep,
    product_id: Annotated[int, Form()],
    name: Annotated[str, Form(min_length=1, max_length=200)],
    file: Annotated[UploadFile, File(description="CSV or JSON table of modes: fn_hz, zeta or "
                                     "q, meff_<axis>_kg [, gamma_<axis>, response]")],
    response_unit: Annotated[str | None, Form()] = None,
    source: Annotated[str, Form()] = "",
    note: Annotated[str, Form()] = "",
    expected_revision: Annotated[int | None, Form(ge=1)] = None,
):
    """The next revision of the product's modal summary `name` (created on first upload)."""
    rev = pm.import_modal_summary(session, actor, product_id, name, file.filename or "upload",
                                  file.file.read(), source=source, note=note,
                                  response_unit=response_unit,
                                  expected_revision=expected_revision)
    return pm.ModalRevisionRead.model_validate(rev)


@router.get("/modal-summaries", response_model=Page[pm.ModalSummaryRead])
def list_modal_summaries(session: SessionDep, _: ReaderDep, page: PageDep,
                         product_id: int | None = None):
    rows = pm.list_summaries(session, product_id)
    items = [pm.read_summary(session, r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.get("/modal-summaries/{summary_id}", response_model=pm.ModalSummaryRead)
def get_modal_summary(summary_id: int, session: SessionDep, _: ReaderDep):
    return pm.read_summary(session, pm.summary_by_id(session, summary_id))


@router.get("/modal-summaries/{summary_id}/revisions",
            response_model=Page[pm.ModalRevisionRead])
def list_modal_revisions(summary_id: int, session: SessionDep, _: ReaderDep, page: PageDep):
    rows = [pm.ModalRevisionRead.model_validate(r) for r in pm.history(session, summary_id)]
    return Page(items=page.window(rows), total=len(rows), offset=page.offset, limit=page.limit)


@router.post("/estimates", status_code=201, response_model=pm.EstimateRead)
def make_estimate(cmd: pm.EstimateIn, session: SessionDep, actor: ActorDep):
    """Peak-response estimate from a modal summary revision and a level."""
    return pm.read_estimate(session, pm.make_estimate(session, actor, cmd))


@router.get("/estimates", response_model=Page[pm.EstimateRead])
def list_estimates(session: SessionDep, _: ReaderDep, page: PageDep,
                   product_id: int | None = None):
    rows = pm.list_estimates(session, product_id)
    items = [pm.read_estimate(session, r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.get("/estimates/{estimate_id}", response_model=pm.EstimateRead)
def get_estimate(estimate_id: int, session: SessionDep, _: ReaderDep):
    """The estimate with `stale` and the reasons, when its inputs changed since."""
    return pm.read_estimate(session, pm.estimate_by_id(session, estimate_id))


@router.post("/requirements/{requirement_id}/evidence/estimate", status_code=201,
             response_model=s.EvidenceRead)
def add_estimate_evidence(requirement_id: int, cmd: pm.EstimateEvidenceIn, session: SessionDep,
                          actor: ActorDep):
    """Analysis evidence from an estimate: MS = allowable / (FS x applied) - 1."""
    return s.EvidenceRead.model_validate(pm.record_as_evidence(session, actor, requirement_id,
                                                               cmd))


@router.get("/documents/loads.pdf", response_class=Response, tags=["documents"],
            responses={200: {"content": {"application/pdf": {}}}})
def loads_pdf(session: SessionDep, _: ReaderDep, product_id: int, axis: s.Axis | None = None):
    """The analysis loads package of a product (newest analysis levels), as PDF (not issued)."""
    content = loads.loads_content(session, product_id, axis=axis)
    name = f"{content.number}-r{content.revision}.pdf"
    return Response(loads_pdf_bytes(content), media_type="application/pdf",
                    headers={"Content-Disposition": f'inline; filename="{name}"',
                             "X-Content-Hash": content.content_hash()})
