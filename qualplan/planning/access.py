"""Users, API tokens, program memberships, sign-ins and roles.

Roles rank viewer < engineer < approver < admin. Admin is global; the other three are
held per program (a Membership row). One function decides every check:
:func:`require_in` (actor, program, needed role). A user's own ``role`` column is the
role it may act with outside any program (creating a program needs engineer) and the
role the upgrade to revision 0014 gave it in every program that existed then.

What a caller may *see* is applied to the database session by :func:`scope_session`
(called by every authentication): rows of programs the caller is not a member of are not
found (404) and are left out of every list (``store.scope``).
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass
from datetime import timedelta

from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.planning.errors import (
    Conflict,
    NotAuthenticated,
    NotFound,
    PermissionDenied,
    ValidationFailed,
)
from qualplan.store import models as m
from qualplan.store import scope
from qualplan.store.repositories import EventRepository, TokenRepository, UserRepository
from qualplan.store.types import utcnow

ROLE_RANK = {m.Role.viewer: 0, m.Role.engineer: 1, m.Role.approver: 2, m.Role.admin: 3}
TOKEN_PREFIX = "qp_"


@dataclass(frozen=True)
class Actor:
    """Who calls a use case, and with which global role.

    ``user_id`` is the stored user behind the actor: every interface builds its actors
    from a stored user (:func:`authenticate`, :func:`actor_for_user`), so the per-program
    memberships of that user decide. An actor without ``user_id`` is in-process code
    (tests, a notebook, the demo's set-up) and acts with ``role`` in every program.
    """

    name: str
    role: m.Role
    user_id: int | None = None

    def can(self, role: m.Role) -> bool:
        return ROLE_RANK[self.role] >= ROLE_RANK[role]


def require(actor: Actor, role: m.Role, action: str) -> None:
    """Raise PermissionDenied unless `actor` holds at least `role`."""
    if not actor.can(role):
        raise PermissionDenied(
            f"{action} needs the role {role.value} or higher; {actor.name} is {actor.role.value}"
        )


#: session.info key of the program roles read with the caller's token: (user id,
#: {program id: role}), for :func:`role_in` to answer without a query of its own
_ROLES_KEY = "qualplan_program_roles"


def _remember_roles(session: Session, user_id: int, roles: dict[int, m.Role]) -> None:
    session.info[_ROLES_KEY] = (user_id, roles)


def _forget_roles(session: Session) -> None:
    """Memberships changed in this session: :func:`role_in` asks the database again."""
    session.info.pop(_ROLES_KEY, None)


def role_in(session: Session, actor: Actor, program_id: int) -> m.Role | None:
    """The role `actor` holds in program `program_id` (None: not a member).

    The roles read with the caller's token in this session's transaction
    (:func:`authenticate_hash`) answer without a query; a program not among them (one
    created in this transaction) is asked of the database."""
    if actor.role == m.Role.admin or actor.user_id is None:
        return actor.role
    known = session.info.get(_ROLES_KEY)
    if known is not None and known[0] == actor.user_id and program_id in known[1]:
        return known[1][program_id]
    row = session.execute(
        select(m.Membership.role).where(m.Membership.user_id == actor.user_id,
                                        m.Membership.program_id == program_id)
    ).scalar_one_or_none()
    return None if row is None else m.Role(row)


def can_in(session: Session, actor: Actor | None, program_id: int, role: m.Role) -> bool:
    """Whether `actor` holds at least `role` in the program (what a page may offer)."""
    if actor is None:
        return False
    held = role_in(session, actor, program_id)
    return held is not None and ROLE_RANK[held] >= ROLE_RANK[m.Role(role)]


def require_in(session: Session, actor: Actor, program_id: int, role: m.Role,
               action: str) -> None:
    """The one check of the use cases: `actor` holds at least `role` in `program_id`.

    A non-member gets NotFound (the program's rows are not visible to it: 404); a member
    with a lower role gets PermissionDenied (403).
    """
    held = role_in(session, actor, program_id)
    if held is None:
        raise NotFound("program", program_id)
    if ROLE_RANK[held] < ROLE_RANK[role]:
        raise PermissionDenied(
            f"{action} needs the role {role.value} or higher in program {program_id}; "
            f"{actor.name} is {held.value} there"
        )


def program_of(session: Session, row) -> int:
    """The program a stored row belongs to (program, product, phase, environment, revision,
    level, requirement, waiver, evidence, document, rule, summary, estimate)."""
    if isinstance(row, m.Program):
        return row.id
    if getattr(row, "program_id", None) is not None:
        return row.program_id
    for attr, cls in (("product_id", m.Product), ("environment_id", m.Environment),
                      ("requirement_id", m.Requirement), ("level_id", m.Level),
                      ("summary_id", m.ModalSummary), ("rule_id", m.TransferRule)):
        parent_id = getattr(row, attr, None)
        if parent_id is not None:
            parent = session.get(cls, parent_id)
            if parent is None:
                raise NotFound(cls.__tablename__.rstrip("s"), parent_id)
            return program_of(session, parent)
    raise TypeError(f"no program known for {type(row).__name__}")


def require_for(session: Session, actor: Actor, row, role: m.Role, action: str) -> None:
    """:func:`require_in` for the program that the stored `row` belongs to."""
    require_in(session, actor, program_of(session, row), role, action)


def member_programs(session: Session, user_id: int) -> list[int]:
    return list(session.execute(
        select(m.Membership.program_id).where(m.Membership.user_id == user_id)
    ).scalars())


def scope_session(session: Session, actor: Actor, programs: list[int] | None = None) -> None:
    """Limit what `session` shows to the programs `actor` is a member of (admins: all);
    `programs`: those memberships when the caller has read them already."""
    if actor.role == m.Role.admin or actor.user_id is None:
        scope.clear(session)
    else:
        scope.limit_to_programs(session, member_programs(session, actor.user_id)
                                if programs is None else programs)


def actor_of_user(user: m.User) -> Actor:
    return Actor(name=user.name, role=m.Role(user.role), user_id=user.id)


def actor_for_user(session: Session, name: str) -> Actor:
    """The Actor of the stored, active user `name` (its session scoped to its programs)."""
    user = UserRepository(session).by_name(name)
    if user is None or not user.active:
        raise NotAuthenticated(f"{name!r} is not an active user of this database")
    actor = actor_of_user(user)
    scope_session(session, actor)
    return actor


def joined(session: Session, actor: Actor, program_id: int) -> None:
    """The creator of a new program becomes its member with its global role."""
    if actor.user_id is None or actor.role == m.Role.admin:
        return
    session.add(m.Membership(user_id=actor.user_id, program_id=program_id, role=actor.role))
    session.flush()
    scope.add_program(session, program_id)
    _forget_roles(session)


# --- memberships --------------------------------------------------------------------------

MEMBER_ROLES = (m.Role.viewer, m.Role.engineer, m.Role.approver)


def _program_row(session: Session, program_id: int) -> m.Program:
    row = session.get(m.Program, program_id)
    if row is None:
        raise NotFound("program", program_id)
    return row


def grant(session: Session, actor: Actor, user_name: str, program_id: int,
          role: m.Role | str) -> m.Membership:
    """Give `user_name` the role `role` in a program (admin, or an approver of it).

    A grant to a member changes its role; the event keeps the old and the new role.
    """
    try:
        role = m.Role(role)
    except ValueError:
        raise ValidationFailed("role", role, "one of viewer, engineer, approver") from None
    if role not in MEMBER_ROLES:
        raise ValidationFailed("role", role.value,
                               "admin is a global role (qualplan user set --role admin); "
                               "a program role is viewer, engineer or approver")
    _program_row(session, program_id)
    require_in(session, actor, program_id, m.Role.approver, "granting a program role")
    user = UserRepository(session).by_name(user_name)
    if user is None:
        raise NotFound("user", user_name)
    row = session.execute(select(m.Membership).where(
        m.Membership.user_id == user.id, m.Membership.program_id == program_id)
    ).scalar_one_or_none()
    before = None if row is None else m.Role(row.role).value
    if row is None:
        row = m.Membership(user_id=user.id, program_id=program_id, role=role)
        session.add(row)
    else:
        row.role = role
    session.flush()
    _forget_roles(session)
    record(session, actor, "grant", "program", program_id, user=user.name,
           role=[before, role.value])
    return row


def revoke(session: Session, actor: Actor, user_name: str, program_id: int) -> None:
    """End `user_name`'s membership of a program (admin, or an approver of it)."""
    _program_row(session, program_id)
    require_in(session, actor, program_id, m.Role.approver, "revoking a program role")
    user = UserRepository(session).by_name(user_name)
    if user is None:
        raise NotFound("user", user_name)
    row = session.execute(select(m.Membership).where(
        m.Membership.user_id == user.id, m.Membership.program_id == program_id)
    ).scalar_one_or_none()
    if row is None:
        raise NotFound("membership", f"{user_name} in program {program_id}")
    before = m.Role(row.role).value
    session.delete(row)
    session.flush()
    _forget_roles(session)
    record(session, actor, "revoke", "program", program_id, user=user.name, role=before)


def members(session: Session, actor: Actor, program_id: int) -> list[tuple[str, m.Role]]:
    """(user name, role) of every member of a program, by name; members see this list."""
    _program_row(session, program_id)
    require_in(session, actor, program_id, m.Role.viewer, "listing members")
    rows = session.execute(
        select(m.User.name, m.Membership.role).join(m.User, m.User.id == m.Membership.user_id)
        .where(m.Membership.program_id == program_id).order_by(m.User.name)
    ).all()
    return [(name, m.Role(role)) for name, role in rows]


def record(
    session: Session, actor: Actor, action: str, entity: str, entity_id: int | None, **detail
) -> None:
    """Append an Event in the caller's transaction."""
    EventRepository(session).append(
        actor=actor.name, action=action, entity=entity, entity_id=entity_id, detail=detail
    )


def hash_token(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def first_admin(session: Session, name: str) -> Actor | None:
    """Create the first user of an empty database, an admin named `name`.

    Returns its Actor, or None when the database has users already (nothing changes).
    The event of its creation names the new admin itself.
    """
    users = UserRepository(session)
    if list(users.list()):
        return None
    name = (name or "").strip()
    if not name or len(name) > 120 or any(not c.isprintable() for c in name):
        raise ValidationFailed("name", name, "a user name is 1 to 120 printable characters")
    user = users.add(m.User(name=name, role=m.Role.admin))
    actor = actor_of_user(user)
    record(session, actor, "create", "user", user.id, name=name, role="admin", first=True)
    return actor


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
        if not active:
            changes["sign_ins_ended"] = _end_sign_ins(session, m.SignIn.user_id == user.id)
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
    ended = _end_sign_ins(session, m.SignIn.token_id == row.id)
    session.flush()
    record(session, actor, "revoke", "token", row.id, sign_ins_ended=ended)
    return row


def authenticate(session: Session, token: str | None) -> Actor:
    """The Actor holding `token`, or NotAuthenticated (unknown, revoked, inactive user)."""
    if not token:
        raise NotAuthenticated("a bearer token is required")
    return authenticate_hash(session, hash_token(token))


def authenticate_hash(session: Session, token_hash: str) -> Actor:
    """Like :func:`authenticate`, from the token's SHA-256 (what a web session keeps).

    The token, its user and the user's programs with its role in each come in one
    statement of plain columns (``TokenRepository.credentials``): on every request, so it
    is kept to one round trip and no ORM objects (three ORM loads were a third of a read's
    CPU time); the roles are kept on the session for :func:`role_in`."""
    rows = TokenRepository(session).credentials(token_hash)
    if not rows:
        raise NotAuthenticated("the token is unknown or revoked")
    revoked_at, user_id, name, role, active, _program, _role = rows[0]
    if revoked_at is not None or not active:
        raise NotAuthenticated("the token is unknown or revoked")
    actor = Actor(name=name, role=m.Role(role), user_id=user_id)
    scope_session(session, actor, [r[5] for r in rows if r[5] is not None])
    # the membership roles came with the token: the use case's role check asks no more
    _remember_roles(session, user_id, {r[5]: m.Role(r[6]) for r in rows if r[5] is not None})
    return actor


# --- sign-ins (server-side browser sessions) ----------------------------------------------

#: Sign-in lifetime [s]: a working day.
SIGN_IN_MAX_AGE_S = 12 * 3600


def open_sign_in(session: Session, token: str) -> tuple[Actor, str]:
    """Check `token`, store a new sign-in; return the actor and the sign-in key (clear).

    The key goes into the signed cookie; only its SHA-256 is stored.
    """
    token = (token or "").strip()
    actor = authenticate(session, token)
    token_row = TokenRepository(session).by_hash(hash_token(token))
    key = secrets.token_urlsafe(32)
    row = m.SignIn(key_hash=hash_token(key), user_id=actor.user_id, token_id=token_row.id,
                   expires_at=utcnow() + timedelta(seconds=SIGN_IN_MAX_AGE_S))
    session.add(row)
    session.flush()
    record(session, actor, "sign-in", "user", actor.user_id, sign_in=row.id)
    return actor, key


def actor_of_sign_in(session: Session, key: str | None) -> Actor:
    """The Actor of an open sign-in (not ended, not expired, token and user still valid)."""
    if not key:
        raise NotAuthenticated("not signed in")
    row = session.execute(
        select(m.SignIn).where(m.SignIn.key_hash == hash_token(key))
    ).scalar_one_or_none()
    if row is None or row.ended_at is not None or row.expires_at <= utcnow():
        raise NotAuthenticated("the sign-in has ended; sign in again")
    user = session.get(m.User, row.user_id)
    if user is None or not user.active:
        raise NotAuthenticated("the user is inactive")
    if row.token_id is not None:
        token = session.get(m.ApiToken, row.token_id)
        if token is None or token.revoked_at is not None:
            raise NotAuthenticated("the token of this sign-in was revoked")
    actor = actor_of_user(user)
    scope_session(session, actor)
    return actor


def _end_sign_ins(session: Session, where) -> int:
    rows = session.execute(
        select(m.SignIn).where(where, m.SignIn.ended_at.is_(None))
    ).scalars().all()
    now = utcnow()
    for row in rows:
        row.ended_at = now
    return len(rows)


def close_sign_in(session: Session, key: str | None) -> bool:
    """End the sign-in of `key` (sign-out): a copy of the cookie is refused afterwards."""
    if not key:
        return False
    row = session.execute(
        select(m.SignIn).where(m.SignIn.key_hash == hash_token(key))
    ).scalar_one_or_none()
    if row is None or row.ended_at is not None:
        return False
    row.ended_at = utcnow()
    session.flush()
    EventRepository(session).append(actor=_user_name(session, row.user_id), action="sign-out",
                                    entity="user", entity_id=row.user_id,
                                    detail={"sign_in": row.id})
    return True


def _user_name(session: Session, user_id: int) -> str:
    user = session.get(m.User, user_id)
    return user.name if user is not None else f"user {user_id}"


def _visible_ids(name: str, ids: list[int]):
    """A select of the ids of entity `name` that belong to the programs `ids` (Core
    tables, so the subquery is explicit), or None for an entity without a program."""
    t = {c.__tablename__: c.__table__ for c in (
        m.Product, m.Phase, m.Environment, m.Level, m.Requirement, m.Document,
        m.TransferRule, m.ModalSummary, m.ResponseEstimate, m.Waiver)}
    products = select(t["products"].c.id).where(t["products"].c.program_id.in_(ids))
    by_program = {"product": "products", "phase": "phases", "requirement": "requirements",
                  "document": "documents", "transfer_rule": "transfer_rules"}
    by_product = {"environment": "environments", "level": "levels",
                  "modal-summary": "modal_summaries", "response-estimate": "response_estimates"}
    if name == "program":
        return ids
    if name in by_program:
        tab = t[by_program[name]]
        return select(tab.c.id).where(tab.c.program_id.in_(ids))
    if name in by_product:
        tab = t[by_product[name]]
        return select(tab.c.id).where(tab.c.product_id.in_(products))
    if name == "waiver":
        req = t["requirements"]
        tab = t["waivers"]
        return select(tab.c.id).where(tab.c.requirement_id.in_(
            select(req.c.id).where(req.c.program_id.in_(ids))))
    return None


_EVENT_ENTITIES = ("program", "product", "phase", "environment", "level", "requirement",
                   "document", "transfer_rule", "modal-summary", "response-estimate",
                   "waiver")


def list_events(session: Session, *, entity: str | None = None, entity_id: int | None = None,
                offset: int = 0, limit: int | None = 200) -> tuple[list[m.Event], int]:
    """A page of events, newest first (who did what, when), and the total count.

    A session scoped to some programs (a non-admin caller) sees only the events of rows
    of those programs (programs, products, phases, environments, levels, requirements,
    documents, transfer rules, modal summaries, estimates, waivers).
    """
    from sqlalchemy import and_, func, or_

    if scope.programs_in_scope(session) is None:
        repo = EventRepository(session)
        rows = repo.list(entity=entity, entity_id=entity_id, offset=offset, limit=limit)
        return list(rows), repo.count(entity=entity, entity_id=entity_id)
    ids = sorted(scope.programs_in_scope(session))
    visible = [and_(m.Event.entity == name, m.Event.entity_id.in_(_visible_ids(name, ids)))
               for name in _EVENT_ENTITIES]
    stmt = select(m.Event).where(or_(*visible))
    if entity is not None:
        stmt = stmt.where(m.Event.entity == entity)
    if entity_id is not None:
        stmt = stmt.where(m.Event.entity_id == entity_id)
    total = session.scalar(select(func.count()).select_from(stmt.subquery()))
    stmt = stmt.order_by(m.Event.id.desc()).offset(offset)
    if limit is not None:
        stmt = stmt.limit(limit)
    return list(session.scalars(stmt)), int(total or 0)
