"""Repositories: typed queries, add and flush. They never commit (the unit of work does).

Append-only aggregates (environment revisions, levels, evidence, events) have
repositories without any update or delete method; the ORM guard
(:mod:`qualplan.store.guards`) and the database triggers refuse the rest.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Generic, TypeVar

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from qualplan.store import models as m

M = TypeVar("M", bound=m.Base)


#: session.info key of the rows locked in the session's current transaction
_LOCKS_KEY = "qualplan_row_locks"


def lock_row(session: Session, model: type[m.Base], row_id: int) -> None:
    """Lock one row until the transaction ends (``SELECT ... FOR UPDATE``; SQLAlchemy
    leaves the clause out on SQLite, whose writers already go one at a time). Under
    PostgreSQL's READ COMMITTED, the statements after the lock see what the previous
    holder committed: numbering after it is safe. A row already locked in the same
    transaction is not locked again (the lock lasts until the transaction ends)."""
    txn = session.get_transaction()
    held = session.info.get(_LOCKS_KEY)
    key = (model.__tablename__, int(row_id))
    if txn is not None and held is not None and held[0] is txn and key in held[1]:
        return
    session.execute(select(model.id).where(model.id == row_id).with_for_update())
    txn = session.get_transaction()  # begun by the statement when none was
    if held is None or held[0] is not txn:
        held = (txn, set())
        session.info[_LOCKS_KEY] = held
    held[1].add(key)


class Repository(Generic[M]):
    model: type[M]

    def __init__(self, session: Session) -> None:
        self.session = session

    def get(self, id_: int) -> M | None:
        return self.session.get(self.model, id_)

    def add(self, obj: M) -> M:
        self.session.add(obj)
        self.session.flush()
        return obj

    def list(self, *, offset: int = 0, limit: int | None = None, **filters) -> Sequence[M]:
        stmt = select(self.model).filter_by(**filters).order_by(self.model.id)
        if offset:
            stmt = stmt.offset(offset)
        if limit is not None:
            stmt = stmt.limit(limit)
        return self.session.scalars(stmt).all()

    def count(self, **filters) -> int:
        stmt = select(func.count()).select_from(self.model).filter_by(**filters)
        return int(self.session.scalar(stmt) or 0)


class UserRepository(Repository[m.User]):
    model = m.User

    def by_name(self, name: str) -> m.User | None:
        return self.session.scalar(select(m.User).where(m.User.name == name))


class TokenRepository(Repository[m.ApiToken]):
    model = m.ApiToken

    def by_hash(self, token_hash: str) -> m.ApiToken | None:
        return self.session.scalar(select(m.ApiToken).where(m.ApiToken.token_hash == token_hash))

    def credentials(self, token_hash: str) -> list[tuple]:
        """What authenticating with a token needs, in one statement of plain columns (no
        ORM objects): one row per program membership of the token's user, each
        ``(revoked_at, user_id, user_name, user_role, user_active, program_id,
        program_role)`` with ``program_id`` and ``program_role`` None for a user of no
        program; no row for an unknown token."""
        tok, usr, mem = (m.ApiToken.__table__, m.User.__table__, m.Membership.__table__)
        stmt = (select(tok.c.revoked_at, usr.c.id, usr.c.name, usr.c.role, usr.c.active,
                       mem.c.program_id, mem.c.role)
                .select_from(tok.join(usr, usr.c.id == tok.c.user_id)
                             .outerjoin(mem, mem.c.user_id == usr.c.id))
                .where(tok.c.token_hash == token_hash))
        return [tuple(r) for r in self.session.execute(stmt)]

    def by_prefix(self, prefix: str) -> Sequence[m.ApiToken]:
        return self.session.scalars(select(m.ApiToken).where(m.ApiToken.prefix == prefix)).all()


class ProgramRepository(Repository[m.Program]):
    model = m.Program

    def by_name(self, name: str) -> m.Program | None:
        return self.session.scalar(select(m.Program).where(m.Program.name == name))


class ProductRepository(Repository[m.Product]):
    model = m.Product

    def by_name(self, program_id: int, name: str) -> m.Product | None:
        return self.session.scalar(
            select(m.Product).where(m.Product.program_id == program_id, m.Product.name == name)
        )

    def subtree_ids(self, product_id: int) -> list[int]:
        """Ids of a product and all its descendants (breadth first)."""
        ids, frontier = [product_id], [product_id]
        while frontier:
            frontier = list(
                self.session.scalars(select(m.Product.id).where(m.Product.parent_id.in_(frontier)))
            )
            ids.extend(frontier)
        return ids


class PhaseRepository(Repository[m.Phase]):
    model = m.Phase


class EnvironmentRepository(Repository[m.Environment]):
    model = m.Environment

    def program_and_phase(self, environment_id: int) -> tuple[int, str | None,
                                                               float | None] | None:
        """``(program_id, phase name, phase duration [s])`` of an environment in one
        statement of three columns (phase None for an environment of no phase): what
        revising it checks, without loading its product and phase rows."""
        env, prod, phase = m.Environment, m.Product, m.Phase
        row = self.session.execute(
            select(prod.program_id, phase.name, phase.duration_s)
            .select_from(env)
            .join(prod, prod.id == env.product_id)
            .outerjoin(phase, phase.id == env.phase_id)
            .where(env.id == environment_id)
        ).first()
        return None if row is None else (int(row[0]), row[1], row[2])


class RevisionRepository:
    """Append-only: add a revision, read revisions. No update, no delete."""

    def __init__(self, session: Session) -> None:
        self.session = session

    def add(self, revision: m.EnvironmentRevision) -> m.EnvironmentRevision:
        self.session.add(revision)
        self.session.flush()
        return revision

    def get(self, id_: int) -> m.EnvironmentRevision | None:
        return self.session.get(m.EnvironmentRevision, id_)

    def latest(self, environment_id: int) -> m.EnvironmentRevision | None:
        # the id first, then the row through the identity map: a revision already loaded
        # in this session (e.g. a level's input) is not read and its array not unpacked
        # again (a 5 min record at 20 kHz is 48 MB of samples)
        rid = self.session.scalar(
            select(m.EnvironmentRevision.id)
            .where(m.EnvironmentRevision.environment_id == environment_id)
            .order_by(m.EnvironmentRevision.number.desc())
            .limit(1)
        )
        return None if rid is None else self.session.get(m.EnvironmentRevision, rid)

    def head(self, environment_id: int) -> tuple[int, str] | None:
        """``(number, content_hash)`` of the newest revision (None without any), as two
        columns: what a new revision is numbered after and compared with, without
        loading the row (its array unpacked, its hash checked)."""
        row = self.session.execute(
            select(m.EnvironmentRevision.number, m.EnvironmentRevision.content_hash)
            .where(m.EnvironmentRevision.environment_id == environment_id)
            .order_by(m.EnvironmentRevision.number.desc())
            .limit(1)
        ).first()
        return None if row is None else (int(row[0]), str(row[1]))

    def latest_number(self, environment_id: int) -> int | None:
        """The number of the newest revision (None without any), read as one column: no
        row loaded, no array unpacked, no hash checked for a number."""
        return self.session.scalar(
            select(func.max(m.EnvironmentRevision.number))
            .where(m.EnvironmentRevision.environment_id == environment_id))

    def history(self, environment_id: int) -> Sequence[m.EnvironmentRevision]:
        return self.session.scalars(
            select(m.EnvironmentRevision)
            .where(m.EnvironmentRevision.environment_id == environment_id)
            .order_by(m.EnvironmentRevision.number)
        ).all()

    def lock_environment(self, environment_id: int) -> None:
        """Hold the environment's row until the transaction ends (``SELECT ... FOR
        UPDATE`` on PostgreSQL), so that parallel revisions of it take turns and each
        numbers after the last committed one. SQLite has one writer at a time (the
        clause is left out there)."""
        lock_row(self.session, m.Environment, environment_id)

    def next_number(self, environment_id: int) -> int:
        """The next revision number, under the environment's row lock."""
        self.lock_environment(environment_id)
        latest = self.session.scalar(
            select(func.max(m.EnvironmentRevision.number)).where(
                m.EnvironmentRevision.environment_id == environment_id
            )
        )
        return int(latest or 0) + 1


class PolicyRepository(Repository[m.MarginPolicy]):
    model = m.MarginPolicy

    def by_name(self, name: str) -> m.MarginPolicy | None:
        return self.session.scalar(select(m.MarginPolicy).where(m.MarginPolicy.name == name))


class LevelRepository:
    """Append-only: deriving again adds a level with the next number."""

    def __init__(self, session: Session) -> None:
        self.session = session

    def add(self, level: m.Level) -> m.Level:
        self.session.add(level)
        self.session.flush()
        return level

    def get(self, id_: int) -> m.Level | None:
        return self.session.get(m.Level, id_)

    def list(self, **filters) -> Sequence[m.Level]:
        return self.session.scalars(select(m.Level).filter_by(**filters).order_by(m.Level.id)).all()

    def next_number(self, product_id: int, name: str) -> int:
        """The next level number of `name`, under the product's row lock (parallel
        derivations of one product take turns; see :func:`lock_row`)."""
        lock_row(self.session, m.Product, product_id)
        latest = self.session.scalar(
            select(func.max(m.Level.number)).where(
                m.Level.product_id == product_id, m.Level.name == name
            )
        )
        return int(latest or 0) + 1


class RequirementRepository(Repository[m.Requirement]):
    model = m.Requirement

    def by_key(self, program_id: int, key: str) -> m.Requirement | None:
        return self.session.scalar(
            select(m.Requirement).where(
                m.Requirement.program_id == program_id, m.Requirement.key == key
            )
        )


class EvidenceRepository:
    """Append-only."""

    def __init__(self, session: Session) -> None:
        self.session = session

    def add(self, evidence: m.Evidence) -> m.Evidence:
        self.session.add(evidence)
        self.session.flush()
        return evidence

    def get(self, id_: int) -> m.Evidence | None:
        return self.session.get(m.Evidence, id_)

    def for_requirement(self, requirement_id: int) -> Sequence[m.Evidence]:
        return self.session.scalars(
            select(m.Evidence)
            .where(m.Evidence.requirement_id == requirement_id)
            .order_by(m.Evidence.id)
        ).all()


class WaiverRepository(Repository[m.Waiver]):
    model = m.Waiver


class EventRepository:
    """Append-only log."""

    def __init__(self, session: Session) -> None:
        self.session = session

    def append(
        self,
        *,
        actor: str,
        action: str,
        entity: str,
        entity_id: int | None,
        detail: dict | None = None,
    ) -> m.Event:
        ev = m.Event(
            actor=actor, action=action, entity=entity, entity_id=entity_id, detail=detail or {}
        )
        self.session.add(ev)
        self.session.flush()
        return ev

    def _filtered(self, stmt, entity: str | None, entity_id: int | None):
        if entity is not None:
            stmt = stmt.where(m.Event.entity == entity)
        if entity_id is not None:
            stmt = stmt.where(m.Event.entity_id == entity_id)
        return stmt

    def list(
        self,
        *,
        entity: str | None = None,
        entity_id: int | None = None,
        offset: int = 0,
        limit: int | None = 200,
    ) -> Sequence[m.Event]:
        stmt = self._filtered(select(m.Event), entity, entity_id)
        stmt = stmt.order_by(m.Event.id.desc()).offset(offset)
        if limit is not None:
            stmt = stmt.limit(limit)
        return self.session.scalars(stmt).all()

    def count(self, *, entity: str | None = None, entity_id: int | None = None) -> int:
        stmt = self._filtered(select(func.count()).select_from(m.Event), entity, entity_id)
        return int(self.session.scalar(stmt) or 0)
