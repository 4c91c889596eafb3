"""A program's readiness at a glance: requirement counts per status, the requirements
that block release with their reason, stale levels, and the issued documents with their
newest revision (the dashboard after sign-in and the programs list read this)."""

from __future__ import annotations

from pydantic import BaseModel
from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.planning import audit as _audit
from qualplan.planning.catalog import get, list_programs
from qualplan.planning.levels import list_levels, staleness_of_levels
from qualplan.store import models as m

#: Status order as a reviewer reads it: what blocks first.
STATUS_ORDER = ("failed", "stale", "open", "waived", "verified")


class Blocking(BaseModel):
    key: str
    requirement_id: int
    product: str
    status: str
    reason: str


class StaleLevel(BaseModel):
    level_id: int
    name: str
    number: int
    product: str
    reasons: list[str]


class DocumentRow(BaseModel):
    number: str
    kind: str
    revision: int
    title: str


class Readiness(BaseModel):
    program_id: int
    program: str
    counts: dict[str, int]
    total: int
    release_ready: bool
    verdict: str
    blocking: list[Blocking]
    stale_levels: list[StaleLevel]
    documents: list[DocumentRow]


def program_readiness(session: Session, program_id: int) -> Readiness:
    """The readiness of program `program_id` (from the audit, the levels and the
    documents; nothing stored)."""
    program = get(session, m.Program, program_id, "program")
    report = _audit.audit(session, program.id)
    counts = {st: report.counts.get(st, 0) for st in STATUS_ORDER}
    blocking = [Blocking(key=i.key, requirement_id=i.requirement_id, product=i.product,
                         status=str(i.status), reason=i.reason)
                for i in report.items if str(i.status) in ("failed", "stale", "open")]
    blocking.sort(key=lambda b: (STATUS_ORDER.index(b.status), b.key))
    products = {p.id: p.name for p in session.scalars(
        select(m.Product).where(m.Product.program_id == program.id))}
    mine = [row for row in list_levels(session) if row.product_id in products]
    reasons = staleness_of_levels(session, mine)  # a few queries for all the levels
    stale = [StaleLevel(level_id=row.id, name=row.name, number=row.number,
                        product=products[row.product_id], reasons=reasons[row.id])
             for row in mine if reasons[row.id]]
    newest: dict[str, m.Document] = {}
    for doc in session.scalars(select(m.Document).where(m.Document.program_id == program.id)
                               .order_by(m.Document.number, m.Document.revision)):
        newest[doc.number] = doc
    docs = [DocumentRow(number=d.number, kind=d.kind.value, revision=d.revision,
                        title=d.title) for d in newest.values()]
    return Readiness(program_id=program.id, program=program.name, counts=counts,
                     total=len(report.items), release_ready=report.release_ready,
                     verdict=report.verdict, blocking=blocking, stale_levels=stale,
                     documents=docs)


def all_programs(session: Session) -> list[Readiness]:
    return [program_readiness(session, p.id) for p in list_programs(session)]
