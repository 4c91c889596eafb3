"""Documents: the test-level specification and the audit report as PDF, and the list
of documents issued (with the hashes they were made from)."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from fastapi import APIRouter, Response
from pydantic import BaseModel, ConfigDict

from qualplan.api.deps import ReaderDep, SessionDep
from qualplan.planning import documents
from qualplan.planning import schemas as s
from qualplan.reports import file_stem, pdf_bytes

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
    return [DocumentRead.model_validate(d) for d in documents.list_documents(session, product_id)]
