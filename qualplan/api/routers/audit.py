"""The margin-closure audit of a program (or one product and its children)."""

from __future__ import annotations

from fastapi import APIRouter

from qualplan.api.deps import ReaderDep, SessionDep
from qualplan.planning import audit as audits
from qualplan.planning import schemas as s

router = APIRouter(tags=["audit"])


@router.get("/audit", response_model=s.AuditReport)
def audit(session: SessionDep, _: ReaderDep, program_id: int, product_id: int | None = None):
    """Every requirement in scope with status and margin; `release_ready` is the gate."""
    return audits.audit(session, program_id, product_id)
