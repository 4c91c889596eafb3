"""Documents: the test-level specification and the audit report as PDF, and the list
of documents issued (with the hashes they were made from)."""

from __future__ import annotations

import tempfile
from datetime import datetime
from pathlib import Path
from typing import Annotated, Any

from fastapi import APIRouter, Request, Response
from fastapi.responses import JSONResponse
from pydantic import BaseModel, ConfigDict, Field

from qualplan.api.deps import ActorDep, ReaderDep, SessionDep
from qualplan.api.routers.jobs import ACCEPTED, JobOption, accepted, runner_name
from qualplan.planning import approvals, documents, jobs
from qualplan.planning import schemas as s
from qualplan.planning.inputs import Id, Line, Text
from qualplan.reports import PdfRenderer, file_stem, pdf_bytes
from qualplan.serving import job_folder

router = APIRouter(tags=["documents"])


class DocumentRead(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    id: int
    program_id: int
    product_id: int | None
    kind: str
    number: str
    revision: int
    title: str
    content_hash: str
    input_hashes: dict[str, Any]
    note: str
    author: str
    created_at: datetime
    #: The levels a specification revision issues (its stored selection).
    level_ids: list[int] = []


class SpecificationIssue(BaseModel):
    model_config = ConfigDict(extra="forbid")

    product_id: Id
    grade: s.Grade = s.Grade.qualification
    #: Exactly the levels to issue; without them the default baseline (GET
    #: /documents/baseline) is issued.
    level_ids: list[Id] | None = None
    number: Line | None = None
    note: Text = ""


class SignoffIn(BaseModel):
    model_config = ConfigDict(extra="forbid")

    role: str = Field(description="prepared, checked or approved")


class SignoffRead(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    id: int
    document_id: int
    role: str
    user_name: str
    signed_at: datetime


def _read(session, doc) -> DocumentRead:
    out = DocumentRead.model_validate(doc)
    out.level_ids = documents.document_levels(session, doc.id)
    return out


def _pdf(content) -> Response:
    name = f"{file_stem(content)}.pdf"
    return Response(pdf_bytes(content), media_type="application/pdf",
                    headers={"Content-Disposition": f'inline; filename="{name}"',
                             "X-Content-Hash": content.content_hash()})


@router.get("/documents/specification.pdf", response_class=Response,
            responses={200: {"content": {"application/pdf": {}}}})
def specification_pdf(session: SessionDep, _: ReaderDep, product_id: int,
                      grade: s.Grade = s.Grade.qualification):
    """A preview of the test-level specification of a product for a grade, as PDF: marked
    "PREVIEW - not issued" on every page, no revision; stale levels shown, marked."""
    return _pdf(documents.specification_content(session, product_id, grade, preview=True))


@router.get("/documents/audit.pdf", response_class=Response,
            responses={200: {"content": {"application/pdf": {}}}})
def audit_pdf(session: SessionDep, _: ReaderDep, program_id: int,
              product_id: int | None = None):
    """A preview of the margin-closure audit of a program (or a product and its children),
    as PDF (marked, no revision)."""
    return _pdf(documents.audit_content(session, program_id, product_id, preview=True))


@router.get("/documents", response_model=list[DocumentRead])
def issued(session: SessionDep, _: ReaderDep, product_id: int | None = None):
    """Documents issued (by `qualplan report` or the demo), with their hashes."""
    return [_read(session, d) for d in documents.list_documents(session, product_id)]


@router.get("/documents/baseline", response_model=list[documents.BaselineItem])
def baseline(session: SessionDep, _: ReaderDep, product_id: int,
             grade: s.Grade = s.Grade.qualification):
    """The default baseline of a product and grade: its current, non-withdrawn test
    levels, each taken or left out (stale, not converged) with the reasons."""
    return documents.default_baseline(session, product_id, grade)


def _document_job(request: Request, session, actor, **fields) -> JSONResponse:
    doc = jobs.DocumentJob(out_dir=job_folder(request), **fields)
    return accepted(request, session, jobs.submit_document(session, actor, doc,
                                                           runner=runner_name(request)))


@router.post("/documents/specification", status_code=201, response_class=Response,
             responses={201: {"content": {"application/pdf": {}}}, **ACCEPTED})
def issue_specification(cmd: SpecificationIssue, request: Request, session: SessionDep,
                        actor: ActorDep, job: Annotated[bool, JobOption] = False):
    """Issue the specification (engineer or higher): exactly `level_ids`, or the default
    baseline; stale or unconverged levels are refused. Returns the issued PDF with the
    document id and revision in `X-Document-Id` and `X-Document-Revision`; content equal
    to the latest revision re-renders it (with its sign-off). With `job=true` the
    document is built and rendered in a job (202); its result gives the document id and
    links the files (`GET /jobs/{id}/files/{name}`)."""
    if job:
        return _document_job(request, session, actor, document="specification",
                             product_id=cmd.product_id, grade=cmd.grade.value,
                             level_ids=cmd.level_ids, number=cmd.number, note=cmd.note)
    content = documents.specification_content(session, cmd.product_id, cmd.grade,
                                              level_ids=cmd.level_ids, number=cmd.number,
                                              note=cmd.note)
    with tempfile.TemporaryDirectory() as tmp:
        issued = documents.issue_document(session, actor, content, PdfRenderer(), Path(tmp))
        body = next(p for p in issued.files if p.suffix == ".pdf").read_bytes()
    return Response(body, status_code=201 if issued.new_revision else 200,
                    media_type="application/pdf",
                    headers={"Content-Disposition":
                             f'inline; filename="{file_stem(content)}.pdf"',
                             "X-Content-Hash": issued.content_hash,
                             "X-Document-Id": str(issued.document_id),
                             "X-Document-Revision": str(issued.revision)})


class AuditIssue(BaseModel):
    model_config = ConfigDict(extra="forbid")

    program_id: Id
    #: Audit this product and its children only.
    product_id: Id | None = None
    number: Line | None = None
    note: Text = ""


class LoadsIssue(BaseModel):
    model_config = ConfigDict(extra="forbid")

    product_id: Id
    axis: s.Axis | None = None
    #: Exactly these analysis levels (default: the newest analysis levels).
    level_ids: list[Id] | None = None
    number: Line | None = None
    note: Text = ""


@router.post("/documents/audit", status_code=202, response_model=jobs.JobRead)
def issue_audit(cmd: AuditIssue, request: Request, session: SessionDep, actor: ActorDep):
    """Issue the margin-closure audit report (engineer or higher), always as a job (202):
    its result gives the document id, `release_ready`, the verdict and the files."""
    return _document_job(request, session, actor, document="audit",
                         program_id=cmd.program_id, product_id=cmd.product_id,
                         number=cmd.number, note=cmd.note)


@router.post("/documents/loads", status_code=202, response_model=jobs.JobRead)
def issue_loads(cmd: LoadsIssue, request: Request, session: SessionDep, actor: ActorDep):
    """Issue the analysis loads package of a product (engineer or higher), always as a
    job (202): its result gives the document id and the files."""
    return _document_job(request, session, actor, document="loads",
                         product_id=cmd.product_id,
                         axis=cmd.axis.value if cmd.axis else None,
                         level_ids=cmd.level_ids, number=cmd.number, note=cmd.note)


@router.post("/documents/{document_id}/signoffs", status_code=201, response_model=SignoffRead)
def sign(document_id: int, cmd: SignoffIn, session: SessionDep, actor: ActorDep):
    """Sign the issued revision as prepared or checked (engineer or higher) or approved
    (approver or higher, after the other two); three distinct users."""
    return SignoffRead.model_validate(
        approvals.sign_document(session, actor, document_id, cmd.role))


@router.get("/documents/{document_id}/signoffs", response_model=list[documents.ApprovalRow])
def signoffs(document_id: int, session: SessionDep, _: ReaderDep):
    """The approval block of an issued revision: each role, who signed and when."""
    return documents.approvals_of(session, document_id)
