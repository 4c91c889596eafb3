"""Refuse updates and deletes of immutable rows before they reach the database."""

from __future__ import annotations

from sqlalchemy import event
from sqlalchemy.orm import Session

from qualplan.store.models import IMMUTABLE_MODELS


class ImmutableRowError(RuntimeError):
    """An attempt to change or delete a row that is append-only."""


@event.listens_for(Session, "before_flush")
def _refuse_changes_to_immutable_rows(session: Session, flush_context, instances) -> None:
    for obj in session.dirty:
        if isinstance(obj, IMMUTABLE_MODELS) and session.is_modified(
            obj, include_collections=False
        ):
            raise ImmutableRowError(
                f"{type(obj).__name__} id={obj.id} is immutable: "
                "make a new revision instead of editing this one"
            )
    for obj in session.deleted:
        if isinstance(obj, IMMUTABLE_MODELS):
            raise ImmutableRowError(
                f"{type(obj).__name__} id={obj.id} is immutable: it cannot be deleted"
            )
