"""Margin policies: list, read, copy, and edit the rules (If-Match)."""

from __future__ import annotations

from fastapi import APIRouter, Response

from qualplan.api.deps import ActorDep, PageDep, ReaderDep, SessionDep, VersionDep, etag
from qualplan.api.models import Page
from qualplan.planning import policies
from qualplan.planning import schemas as s

router = APIRouter(tags=["policies"])


@router.get("/policies", response_model=Page[s.PolicyRead])
def list_policies(session: SessionDep, _: ReaderDep, page: PageDep):
    rows = policies.list_policies(session)
    items = [s.PolicyRead.model_validate(r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.get("/policies/{policy_id}", response_model=s.PolicyRead)
def get_policy(policy_id: int, session: SessionDep, _: ReaderDep, response: Response):
    row = policies.policy_ref(session, policy_id)
    response.headers["ETag"] = etag(row.version)
    return s.PolicyRead.model_validate(row)


@router.post("/policies/{policy_id}/copy", status_code=201, response_model=s.PolicyRead)
def copy_policy(
    policy_id: int, cmd: s.PolicyCopy, session: SessionDep, actor: ActorDep, response: Response
):
    row = policies.copy_policy(session, actor, policy_id, cmd)
    response.headers["ETag"] = etag(row.version)
    return s.PolicyRead.model_validate(row)


@router.put("/policies/{policy_id}/rules", response_model=s.PolicyRead)
def update_rules(
    policy_id: int,
    cmd: s.PolicyUpdate,
    version: VersionDep,
    session: SessionDep,
    actor: ActorDep,
    response: Response,
):
    """Replace the rules. Levels derived before keep their recipe and turn stale."""
    row = policies.update_policy(session, actor, policy_id, cmd, version)
    response.headers["ETag"] = etag(row.version)
    return s.PolicyRead.model_validate(row)


@router.post("/policies/{policy_id}/confirmations", status_code=201,
             response_model=s.PolicyConfirmationRead)
def confirm_policy(
    policy_id: int, cmd: s.PolicyConfirm, version: VersionDep, session: SessionDep,
    actor: ActorDep,
):
    """Record that the policy's values were checked against the issue in force of its
    standard (approver). Issued documents then state who checked, and when."""
    row = policies.confirm_policy(session, actor, policy_id, cmd.issue, cmd.note, version)
    return s.PolicyConfirmationRead.model_validate(row)
