"""Requirements (If-Match on edits), their computed status, and waivers (approvers)."""

from __future__ import annotations

from typing import Literal

from fastapi import APIRouter, Response

from qualplan.api.deps import ActorDep, PageDep, ReaderDep, SessionDep, VersionDep, etag
from qualplan.api.models import Page, RequirementPatch, RequirementStatus
from qualplan.api.responses import json_response
from qualplan.planning import approvals, catalog, requirements
from qualplan.planning import schemas as s

router = APIRouter(tags=["requirements"])


@router.get("/requirements", response_model=Page[s.RequirementRead])
def list_requirements(
    session: SessionDep,
    _: ReaderDep,
    page: PageDep,
    program_id: int | None = None,
    product_id: int | None = None,
):
    """Requirements by key, with their computed status (of one program or product)."""
    scope = None
    if product_id is not None:
        scope = catalog.product_subtree_ids(session, product_id)
    items, total = requirements.requirement_page(session, program_id=program_id,
                                                 product_ids=scope, offset=page.offset,
                                                 limit=page.limit)
    return json_response(Page[s.RequirementRead](items=items, total=total,
                                                 offset=page.offset, limit=page.limit))


@router.get("/programs/{program_id}/traceability", response_model=Page[s.TraceRow])
def traceability(
    program_id: int,
    session: SessionDep,
    _: ReaderDep,
    page: PageDep,
    status: s.Status | None = None,
    method: s.VerificationMethod | None = None,
    product_id: int | None = None,
    q: str | None = None,
    sort: s.TraceSort = "key",
    dir: Literal["asc", "desc"] = "asc",
):
    """The traceability matrix of a program: each requirement with its level, latest
    evidence and status; filtered and ordered as the web page's matrix is."""
    rows = requirements.traceability(
        session, program_id, status=status, method=method.value if method else None,
        product_id=product_id, text=q, sort=sort, descending=dir == "desc")
    return Page(items=page.window(rows), total=len(rows), offset=page.offset, limit=page.limit)


@router.post("/requirements", status_code=201, response_model=s.RequirementRead)
def create_requirement(
    cmd: s.RequirementCreate, session: SessionDep, actor: ActorDep, response: Response
):
    row = requirements.create_requirement(session, actor, cmd)
    response.headers["ETag"] = etag(row.version)
    return requirements.read_requirement(session, row)


@router.get("/requirements/{requirement_id}", response_model=s.RequirementRead)
def get_requirement(requirement_id: int, session: SessionDep, _: ReaderDep):
    out, version = requirements.requirement_read(session, requirement_id)
    return json_response(out, etag=etag(version))


@router.patch("/requirements/{requirement_id}", response_model=s.RequirementRead)
def update_requirement(
    requirement_id: int,
    patch: RequirementPatch,
    version: VersionDep,
    session: SessionDep,
    actor: ActorDep,
    response: Response,
):
    """Edit fields; If-Match names the version edited (412 when it is not the current)."""
    cmd = s.RequirementUpdate(**patch.model_dump(exclude_unset=True), expected_version=version)
    row = requirements.update_requirement(session, actor, requirement_id, cmd)
    response.headers["ETag"] = etag(row.version)
    return requirements.read_requirement(session, row)


@router.get("/requirements/{requirement_id}/status", response_model=RequirementStatus)
def requirement_status(requirement_id: int, session: SessionDep, _: ReaderDep):
    row = requirements.requirement_ref(session, None, requirement_id)
    st = requirements.status_of(session, row)
    return RequirementStatus(
        requirement_id=row.id, key=row.key, status=st.status, reason=st.reason
    )


@router.post(
    "/requirements/{requirement_id}/waivers",
    status_code=201,
    response_model=s.WaiverRead,
    tags=["waivers"],
)
def waive(requirement_id: int, cmd: s.WaiverIn, session: SessionDep, actor: ActorDep):
    """An approver waives the requirement until `expires_at` (within the policy's
    `max_waiver_days`); under the policy's two-person rule the approver is neither an
    author of its evidence nor the requester; with no evidence at all, an admin."""
    return s.WaiverRead.model_validate(requirements.waive(session, actor, requirement_id, cmd))


@router.post("/requirements/{requirement_id}/waiver-requests", status_code=201,
             response_model=s.WaiverRequestRead, tags=["waivers"])
def request_waiver(requirement_id: int, cmd: s.WaiverRequestIn, session: SessionDep,
                   actor: ActorDep):
    """Ask that the requirement be waived (engineer or higher); an approver other than
    the requester (and the evidence's authors, under a two-person policy) decides."""
    return s.WaiverRequestRead.model_validate(
        approvals.request_waiver(session, actor, requirement_id, cmd))


@router.get("/requirements/{requirement_id}/waiver-requests",
            response_model=list[s.WaiverRequestRead], tags=["waivers"])
def waiver_requests(requirement_id: int, session: SessionDep, _: ReaderDep):
    requirements.requirement_by_id(session, requirement_id)
    return [s.WaiverRequestRead.model_validate(x)
            for x in approvals.waiver_requests(session, requirement_id)]


@router.post("/waivers/{waiver_id}/revoke", response_model=s.WaiverRead, tags=["waivers"])
def revoke_waiver(waiver_id: int, session: SessionDep, actor: ActorDep):
    return s.WaiverRead.model_validate(requirements.revoke_waiver(session, actor, waiver_id))
