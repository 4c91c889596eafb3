"""Row scope of a session: what one caller may see, applied to every ORM query.

``limit_to_programs(session, ids)`` makes every later ORM SELECT of the session see only
the rows that belong to the programs ``ids`` (programs, products, phases, environments
and their revisions, levels, requirements, evidence, waivers, documents, modal summaries,
estimates, mountings, transfer rules). A row of another program is simply not found:
the use case answers NotFound (404) for it, and every list is filtered. The criteria are
added as SQLAlchemy loader criteria (``with_loader_criteria``, with a cache key of their
own: :class:`_ScopeCriteria`) in a ``do_orm_execute`` hook (SQLAlchemy
2.0 documentation, "ORM Querying Guide: Adding global WHERE / ON criteria").

Which programs a caller may see is decided in ``planning.access``; this module only
applies it. A session without a scope (the CLI on its own database as an admin, tests,
migrations) sees everything.
"""

from __future__ import annotations

from functools import lru_cache

from sqlalchemy import event, literal_column, select
from sqlalchemy.orm import ORMExecuteState, Session
from sqlalchemy.orm.util import LoaderCriteriaOption

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


class _ScopeCriteria(LoaderCriteriaOption):
    """``with_loader_criteria(cls, criterion, include_aliases=True)`` whose cache key is
    its entity and the programs' ids, computed once.

    SQLAlchemy walks every option's criterion to build the statement's cache key at each
    execution (``visit_executable_options``); the fifteen criteria of a scope, with
    their subselects, made every scoped ORM statement about 0.5 ms dearer in CPU than an
    unscoped one. A criterion here is fully determined by (entity, ids) and holds no bound
    parameter (the ids are written into the SQL, :func:`_in`), so that pair is a sound
    cache key: equal keys, equal SQL."""

    __slots__ = ("_scope_key",)

    def __init__(self, entity, criterion, ids: tuple[int, ...]) -> None:
        super().__init__(entity, criterion, include_aliases=True)
        if criterion._generate_cache_key().bindparams:  # never: the ids are literal
            raise AssertionError(f"row scope criterion of {entity.__name__} has parameters")
        self._scope_key = (_ScopeCriteria, entity.__name__, ids)

    def _gen_cache_key(self, anon_map, bindparams):
        return self._scope_key


@lru_cache(maxsize=1024)
def _criteria(ids: frozenset[int]) -> tuple:
    """The loader criteria of a scope, built once per set of programs (they are immutable
    statement options; building them was a sixth of a read request's CPU time)."""
    ids_list = sorted(ids)
    key = tuple(ids_list)
    products = m.Product.__table__
    requirements = m.Requirement.__table__
    environments = m.Environment.__table__
    product_ids = select(products.c.id).where(_in(products.c.program_id, ids_list))
    options = [_ScopeCriteria(m.Program, _in(m.Program.id, ids_list), key)]
    for cls in _BY_PROGRAM:
        options.append(_ScopeCriteria(cls, _in(cls.program_id, ids_list), key))
    for cls in _BY_PRODUCT:
        options.append(_ScopeCriteria(cls, cls.product_id.in_(product_ids), key))
    env_ids = select(environments.c.id).where(environments.c.product_id.in_(product_ids))
    options.append(_ScopeCriteria(
        m.EnvironmentRevision, m.EnvironmentRevision.environment_id.in_(env_ids), key))
    req_ids = select(requirements.c.id).where(_in(requirements.c.program_id, ids_list))
    for cls in (m.Evidence, m.Waiver):
        options.append(_ScopeCriteria(cls, cls.requirement_id.in_(req_ids), key))
    return tuple(options)


@event.listens_for(Session, "do_orm_execute")
def _apply_scope(state: ORMExecuteState) -> None:
    ids = state.session.info.get(_KEY)
    if ids is None or not state.is_select or state.is_column_load:
        return
    state.statement = state.statement.options(*_criteria(ids))
