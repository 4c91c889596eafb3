"""Margin-closure audit for release: every requirement in scope, its status and margin,
what is stale and why, what is open; the gate passes only when everything is verified
or validly waived."""

from __future__ import annotations

from collections import Counter
from datetime import UTC, datetime

from sqlalchemy import select
from sqlalchemy.orm import Session, defer, selectinload

from qualplan.planning import schemas as s
from qualplan.planning.catalog import get
from qualplan.planning.errors import ValidationFailed
from qualplan.planning.margins import margins_of
from qualplan.planning.requirements import staleness_of, status_of
from qualplan.store import models as m
from qualplan.store.repositories import ProductRepository

STATUSES = ("verified", "waived", "failed", "stale", "open")
#: Unit of required and achieved margins by verification method.
MARGIN_UNITS = {"analysis": "MS", "test": "dB"}


def audit(
    session: Session, program_id: int, product_id: int | None = None, now: datetime | None = None
) -> s.AuditReport:
    """Audit the requirements of a program, or of one product and its children."""
    now = now or datetime.now(UTC)
    program = get(session, m.Program, program_id, "program")
    # the columns the audit reads, each relationship in one query (no lazy load per row);
    # the wording of a requirement and a record's samples stay in the database
    stmt = (
        select(m.Requirement)
        .where(m.Requirement.program_id == program.id)
        .options(
            defer(m.Requirement.text), defer(m.Requirement.acceptance_criterion),
            selectinload(m.Requirement.evidence).defer(m.Evidence.data)
            .defer(m.Evidence.rationale),
            selectinload(m.Requirement.waivers),
        )
        .order_by(m.Requirement.key)
    )
    scope = f"program {program.name}"
    if product_id is not None:
        product = get(session, m.Product, product_id, "product")
        if product.program_id != program.id:
            raise ValidationFailed("product_id", product_id,
                                   f"the product belongs to another program than {program.name!r}")
        ids = ProductRepository(session).subtree_ids(product.id)
        stmt = stmt.where(m.Requirement.product_id.in_(ids))
        scope = f"product {product.name} and its children"
    rows = session.scalars(stmt).all()
    # the few levels and products the requirements point at, each row once: `req.level`
    # and `req.product` then come from the session's identity map, without a query
    # (a selectinload of these many-to-one relations costs per requirement row)
    held = _load_by_id(session, m.Level, {r.level_id for r in rows} - {None})
    held += _load_by_id(session, m.Product, {r.product_id for r in rows})
    # staleness of every level in scope in a few queries (levels.staleness_of_levels)
    level_stale = staleness_of(session, rows)
    coverage_cache: dict = {}
    items = []
    for req in rows:
        st = status_of(session, req, level_stale=level_stale, now=now,
                       coverage_cache=coverage_cache)
        ev = st.evidence if st.evidence is not None else (
            req.evidence[-1] if req.evidence else None)
        mg = st.margins if st.margins is not None else margins_of(session, req, ev,
                                                                  coverage_cache)
        achieved = mg.analysis_ms if mg.analysis_ms is not None else mg.achieved_over_limit_db
        shortfall = None
        if achieved is not None and achieved < req.required_margin:
            shortfall = req.required_margin - achieved
        items.append(
            s.AuditItem(
                key=req.key,
                requirement_id=req.id,
                product=req.product.name,
                level=f"{req.level.name} #{req.level.number}" if req.level else None,
                method=req.method,
                status=st.status,
                reason=st.reason,
                required_margin=req.required_margin,
                achieved_margin=achieved,
                margin_unit=MARGIN_UNITS.get(req.method.value, ""),
                shortfall=shortfall,
                evidence_id=ev.id if ev is not None else None,
                margins=mg.model_dump(mode="json"),
            )
        )
    del held
    counts = Counter(i.status for i in items)
    ready = bool(items) and all(i.status in ("verified", "waived") for i in items)
    if not items:
        verdict = "NOT READY: no requirement in scope"
    elif ready:
        verdict = f"READY FOR RELEASE: all {len(items)} requirements verified or waived"
    else:
        blocking = len(items) - counts["verified"] - counts["waived"]
        verdict = (
            f"NOT READY: {blocking} of {len(items)} requirements block release "
            f"({counts['failed']} failed, {counts['stale']} stale, {counts['open']} open)"
        )
    return s.AuditReport(
        program=program.name,
        scope=scope,
        generated_at=now,
        counts={k: counts.get(k, 0) for k in STATUSES},
        items=items,
        release_ready=ready,
        verdict=verdict,
    )


def _load_by_id(session: Session, model, ids: set[int]) -> list:
    """The rows of `model` with these ids (in chunks of 900 ids per IN list)."""
    ids_ = sorted(ids)
    out: list = []
    for i in range(0, len(ids_), 900):
        stmt = select(model).where(model.id.in_(ids_[i:i + 900]))
        if model is m.Level:
            stmt = stmt.options(selectinload(m.Level.policy))
        out += session.scalars(stmt).all()
    return out
