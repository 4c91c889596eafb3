"""Shapes of the HTTP interface that the planning schemas do not have (pages, bodies
whose version travels in If-Match, one-time token answers)."""

from __future__ import annotations

from datetime import datetime
from typing import Any, Generic, TypeVar

from pydantic import BaseModel, ConfigDict, Field

from qualplan.planning.inputs import Id, Line, Num, Text
from qualplan.planning.schemas import Command, Status, VerificationMethod

T = TypeVar("T")


class Page(BaseModel, Generic[T]):
    """One page of a list (``offset``/``limit``), with the ``total`` count."""

    items: list[T]
    total: int
    offset: int
    limit: int


class RequirementPatch(Command):
    """Fields to change; the version edited comes in If-Match.

    Only ``level_id`` may be set to null (the requirement then points at no level);
    the other fields are left alone when absent and refused when null.
    """

    text: Text = Field(default=None, min_length=1)  # type: ignore[assignment]
    level_id: Id | None = None
    method: VerificationMethod = None  # type: ignore[assignment]
    acceptance_criterion: Text = None  # type: ignore[assignment]
    required_margin: Num = None  # type: ignore[assignment]


class RequirementStatus(BaseModel):
    requirement_id: int
    key: str
    status: Status
    reason: str


class TokenCreate(Command):
    label: Line = Field(default="", max_length=120)


class TokenCreated(BaseModel):
    """The token in clear: shown this once, stored only as a hash."""

    token: str
    prefix: str
    user: str
    label: str


class TokenRevoked(BaseModel):
    prefix: str
    revoked_at: datetime


class EventRead(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    id: int
    at: datetime
    actor: str
    action: str
    entity: str
    entity_id: int | None
    detail: dict[str, Any]
