"""The event log (who did what, when): read-only."""

from __future__ import annotations

from fastapi import APIRouter

from qualplan.api.deps import PageDep, ReaderDep, SessionDep
from qualplan.api.models import EventRead, Page
from qualplan.planning import access

router = APIRouter(tags=["events"])


@router.get("/events", response_model=Page[EventRead])
def list_events(
    session: SessionDep,
    _: ReaderDep,
    page: PageDep,
    entity: str | None = None,
    entity_id: int | None = None,
):
    """Newest first; filters `entity` (e.g. requirement) and `entity_id`."""
    rows, total = access.list_events(session, entity=entity, entity_id=entity_id,
                                     offset=page.offset, limit=page.limit)
    items = [EventRead.model_validate(r) for r in rows]
    return Page(items=items, total=total, offset=page.offset, limit=page.limit)
