"""Users and API tokens (admins manage users; a user may make a token for themself)."""

from __future__ import annotations

from fastapi import APIRouter

from qualplan.api.deps import ActorDep, PageDep, SessionDep
from qualplan.api.models import Page, TokenCreate, TokenCreated, TokenRevoked
from qualplan.planning import access
from qualplan.planning import schemas as s
from qualplan.planning.schemas import Role

router = APIRouter(tags=["users"])


@router.post("/users", status_code=201, response_model=s.UserRead)
def create_user(cmd: s.UserCreate, session: SessionDep, actor: ActorDep):
    return s.UserRead.model_validate(access.create_user(session, actor, cmd.name, cmd.role))


@router.get("/users", response_model=Page[s.UserRead])
def list_users(session: SessionDep, actor: ActorDep, page: PageDep):
    access.require(actor, Role.admin, "listing users")
    rows = access.list_users(session)
    items = [s.UserRead.model_validate(r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.post("/users/{user_name}/tokens", status_code=201, response_model=TokenCreated)
def create_token(user_name: str, cmd: TokenCreate, session: SessionDep, actor: ActorDep):
    """A new token for `user_name` (admins, or the user themself). Shown once."""
    token = access.create_token(session, actor, user_name, cmd.label)
    return TokenCreated(token=token, prefix=token[:10], user=user_name, label=cmd.label)


@router.post("/tokens/{prefix}/revoke", response_model=TokenRevoked)
def revoke_token(prefix: str, session: SessionDep, actor: ActorDep):
    """Revoke the token that starts with `prefix` (its first 10 characters)."""
    row = access.revoke_token(session, actor, prefix)
    return TokenRevoked(prefix=row.prefix, revoked_at=row.revoked_at)
