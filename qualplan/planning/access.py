"""Users, API tokens and roles (viewer < engineer < approver < admin)."""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass

from sqlalchemy.orm import Session

from qualplan.planning.errors import Conflict, NotAuthenticated, NotFound, PermissionDenied
from qualplan.store import models as m
from qualplan.store.repositories import EventRepository, TokenRepository, UserRepository
from qualplan.store.types import utcnow

ROLE_RANK = {m.Role.viewer: 0, m.Role.engineer: 1, m.Role.approver: 2, m.Role.admin: 3}
TOKEN_PREFIX = "qp_"


@dataclass(frozen=True)
class Actor:
    """Who calls a use case, and with which role."""

    name: str
    role: m.Role

    def can(self, role: m.Role) -> bool:
        return ROLE_RANK[self.role] >= ROLE_RANK[role]


def require(actor: Actor, role: m.Role, action: str) -> None:
    """Raise PermissionDenied unless `actor` holds at least `role`."""
    if not actor.can(role):
        raise PermissionDenied(
            f"{action} needs the role {role.value} or higher; {actor.name} is {actor.role.value}"
        )


def record(
    session: Session, actor: Actor, action: str, entity: str, entity_id: int | None, **detail
) -> None:
    """Append an Event in the caller's transaction."""
    EventRepository(session).append(
        actor=actor.name, action=action, entity=entity, entity_id=entity_id, detail=detail
    )


def hash_token(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def create_user(session: Session, actor: Actor, name: str, role: m.Role) -> m.User:
    require(actor, m.Role.admin, "adding a user")
    users = UserRepository(session)
    if users.by_name(name) is not None:
        raise Conflict(f"user {name!r} exists already")
    user = users.add(m.User(name=name, role=m.Role(role)))
    record(session, actor, "create", "user", user.id, name=name, role=user.role.value)
    return user


def list_users(session: Session) -> list[m.User]:
    return list(UserRepository(session).list())


def set_user(session: Session, actor: Actor, name: str, *, role: m.Role | None = None,
             active: bool | None = None) -> m.User:
    """Change a user's role or (de)activate the user; a deactivated user's tokens stop."""
    require(actor, m.Role.admin, "managing users")
    user = UserRepository(session).by_name(name)
    if user is None:
        raise NotFound("user", name)
    changes = {}
    if role is not None and user.role != m.Role(role):
        changes["role"] = [user.role.value, m.Role(role).value]
        user.role = m.Role(role)
    if active is not None and user.active != active:
        changes["active"] = [user.active, active]
        user.active = active
    session.flush()
    record(session, actor, "update", "user", user.id, name=name, **changes)
    return user


def list_tokens(session: Session, actor: Actor, user_name: str) -> list[m.ApiToken]:
    """A user's tokens (prefix, label, dates; never the token)."""
    user = UserRepository(session).by_name(user_name)
    if user is None:
        raise NotFound("user", user_name)
    if actor.name != user.name:
        require(actor, m.Role.admin, "listing another user's tokens")
    return list(user.tokens)


def create_token(session: Session, actor: Actor, user_name: str, label: str = "") -> str:
    """Create a token for `user_name`; return it in clear (shown once, stored hashed)."""
    user = UserRepository(session).by_name(user_name)
    if user is None:
        raise NotFound("user", user_name)
    if actor.name != user.name:
        require(actor, m.Role.admin, "creating a token for another user")
    token = TOKEN_PREFIX + secrets.token_urlsafe(32)
    row = TokenRepository(session).add(
        m.ApiToken(user_id=user.id, token_hash=hash_token(token), prefix=token[:10], label=label)
    )
    record(session, actor, "create", "token", row.id, user=user.name, label=label)
    return token


def revoke_token(session: Session, actor: Actor, prefix: str) -> m.ApiToken:
    """Revoke the token whose first characters are `prefix` (as listed); idempotent."""
    require(actor, m.Role.admin, "revoking a token")
    rows = TokenRepository(session).by_prefix(prefix)
    if not rows:
        raise NotFound("token", prefix)
    if len(rows) > 1:
        raise Conflict(f"{len(rows)} tokens start with {prefix!r}; revoke by a longer prefix")
    (row,) = rows
    if row.revoked_at is not None:
        return row  # revoking again changes nothing: the first time is kept
    row.revoked_at = utcnow()
    session.flush()
    record(session, actor, "revoke", "token", row.id)
    return row


def authenticate(session: Session, token: str | None) -> Actor:
    """The Actor holding `token`, or NotAuthenticated (unknown, revoked, inactive user)."""
    if not token:
        raise NotAuthenticated("a bearer token is required")
    return authenticate_hash(session, hash_token(token))


def authenticate_hash(session: Session, token_hash: str) -> Actor:
    """Like :func:`authenticate`, from the token's SHA-256 (what a web session keeps)."""
    row = TokenRepository(session).by_hash(token_hash)
    if row is None or row.revoked_at is not None or not row.user.active:
        raise NotAuthenticated("the token is unknown or revoked")
    return Actor(name=row.user.name, role=row.user.role)


def list_events(session: Session, *, entity: str | None = None, entity_id: int | None = None,
                offset: int = 0, limit: int | None = 200) -> tuple[list[m.Event], int]:
    """A page of events, newest first (who did what, when), and the total count."""
    repo = EventRepository(session)
    rows = repo.list(entity=entity, entity_id=entity_id, offset=offset, limit=limit)
    return list(rows), repo.count(entity=entity, entity_id=entity_id)
