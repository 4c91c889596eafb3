"""Row scope of a session: what one caller may see, applied to every ORM query.

``limit_to_programs(session, ids)`` makes every later ORM SELECT of the session see only
the rows that belong to the programs ``ids`` (programs, products, phases, environments
and their revisions, levels, requirements, evidence, waivers, documents, modal summaries,
estimates, mountings, transfer rules). A row of another program is simply not found:
the use case answers NotFound (404) for it, and every list is filtered. The criteria are
added with SQLAlchemy's ``with_loader_criteria`` in a ``do_orm_execute`` hook (SQLAlchemy
2.0 documentation, "ORM Querying Guide: Adding global WHERE / ON criteria").

Which programs a caller may see is decided in ``planning.access``; this module only
applies it. A session without a scope (the CLI on its own database as an admin, tests,
migrations) sees everything.
"""

from __future__ import annotations

from functools import lru_cache

from sqlalchemy import event, literal_column, select
from sqlalchemy.orm import ORMExecuteState, Session, with_loader_criteria

from qualplan.store import models as m

_KEY = "qualplan_program_scope"

# Tables that carry program_id themselves, and tables reached through a product.
_BY_PROGRAM = (m.Product, m.Phase, m.Requirement, m.Document, m.TransferRule)
_BY_PRODUCT = (m.Environment, m.Level, m.ModalSummary, m.ResponseEstimate, m.Mounting,
               m.EnvironmentDerivation)


def limit_to_programs(session: Session, program_ids) -> None:
    """From now on, `session` sees only the rows of the programs `program_ids`."""
    session.info[_KEY] = frozenset(int(i) for i in program_ids)


def add_program(session: Session, program_id: int) -> None:
    """Widen a scoped session by one program (its creator becomes a member)."""
    if _KEY in session.info:
        session.info[_KEY] = session.info[_KEY] | {int(program_id)}


def programs_in_scope(session: Session) -> frozenset[int] | None:
    """The programs a scoped session may see; None when the session is not scoped."""
    return session.info.get(_KEY)


def clear(session: Session) -> None:
    session.info.pop(_KEY, None)


def _in(column, ids: list[int]):
    """``column IN (1, 2, ...)`` with the ids written into the SQL (``IN (NULL)``, true
    of no row, for none). The ids are integers of this database's own rows (programs
    the caller is a member of), never user text. Written, not bound: a bound list is an
    expanding parameter in every statement's cache key, whose matching and expansion
    per execution cost more than the statement's own parameters (SQLAlchemy compiles
    the statement once per set of programs instead; the statement cache keeps it)."""
    listed = ", ".join(str(int(i)) for i in ids) or "NULL"
    return column.op("IN", is_comparison=True)(literal_column(f"({listed})"))


@lru_cache(maxsize=1024)
def _criteria(ids: frozenset[int]) -> tuple:
    """The loader criteria of a scope, built once per set of programs (they are immutable
    statement options; building them was a sixth of a read request's CPU time)."""
    ids_list = sorted(ids)
    products = m.Product.__table__
    requirements = m.Requirement.__table__
    environments = m.Environment.__table__
    product_ids = select(products.c.id).where(_in(products.c.program_id, ids_list))
    options = [with_loader_criteria(m.Program, _in(m.Program.id, ids_list),
                                    include_aliases=True)]
    for cls in _BY_PROGRAM:
        options.append(with_loader_criteria(cls, _in(cls.program_id, ids_list),
                                            include_aliases=True))
    for cls in _BY_PRODUCT:
        options.append(with_loader_criteria(cls, cls.product_id.in_(product_ids),
                                            include_aliases=True))
    env_ids = select(environments.c.id).where(environments.c.product_id.in_(product_ids))
    options.append(with_loader_criteria(
        m.EnvironmentRevision, m.EnvironmentRevision.environment_id.in_(env_ids),
        include_aliases=True))
    req_ids = select(requirements.c.id).where(_in(requirements.c.program_id, ids_list))
    for cls in (m.Evidence, m.Waiver):
        options.append(with_loader_criteria(cls, cls.requirement_id.in_(req_ids),
                                            include_aliases=True))
    return tuple(options)


@event.listens_for(Session, "do_orm_execute")
def _apply_scope(state: ORMExecuteState) -> None:
    ids = state.session.info.get(_KEY)
    if ids is None or not state.is_select or state.is_column_load:
        return
    state.statement = state.statement.options(*_criteria(ids))
