"""Margin-closure audit for release: every requirement in scope, its status and margin,
what is stale and why, what is open; the gate passes only when everything is verified
or validly waived."""

from __future__ import annotations

import gc
import threading
from collections import Counter
from contextlib import contextmanager
from datetime import UTC, datetime

from sqlalchemy import inspect, select
from sqlalchemy.orm import Session, defer, selectinload
from sqlalchemy.orm.attributes import set_committed_value

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


_pause_lock = threading.Lock()
_pause = {"depth": 0, "was_enabled": False}


@contextmanager
def cycle_collection_paused():
    """Pause Python's cyclic garbage collector while an audit builds its rows (reference
    counting still frees memory; cycles wait until the outermost pause ends). An audit
    of 20,000 requirements holds some 100,000 ORM objects: each full collection walks
    all of them, and the collector ran six or seven full passes per audit, half its CPU
    time (measured, ``gc.callbacks``; the collector's rules: Python's ``gc`` module
    documentation). Nested and concurrent audits share one pause."""
    with _pause_lock:
        if _pause["depth"] == 0:
            _pause["was_enabled"] = gc.isenabled()
            gc.disable()
        _pause["depth"] += 1
    try:
        yield
    finally:
        with _pause_lock:
            _pause["depth"] -= 1
            if _pause["depth"] == 0 and _pause["was_enabled"]:
                gc.enable()


def audit(
    session: Session, program_id: int, product_id: int | None = None, now: datetime | None = None
) -> s.AuditReport:
    """Audit the requirements of a program, or of one product and its children."""
    with cycle_collection_paused():
        return _audit(session, program_id, product_id, now)


def _audit(session: Session, program_id: int, product_id: int | None, now: datetime | None
           ) -> s.AuditReport:
    now = now or datetime.now(UTC)
    program = get(session, m.Program, program_id, "program")
    # the requirements in scope, then their evidence, waivers, levels and products in one
    # query each (joined on the scope, not IN lists of ids), set as loaded relations: no
    # lazy load per row. The wording of a requirement and a record's samples stay in the
    # database (a document that shows them loads them).
    scope_of = [m.Requirement.program_id == program.id]
    scope = f"program {program.name}"
    if product_id is not None:
        product = get(session, m.Product, product_id, "product")
        if product.program_id != program.id:
            raise ValidationFailed("product_id", product_id,
                                   f"the product belongs to another program than {program.name!r}")
        ids = ProductRepository(session).subtree_ids(product.id)
        scope_of.append(m.Requirement.product_id.in_(ids))
        scope = f"product {product.name} and its children"
    rows = session.scalars(
        select(m.Requirement).where(*scope_of)
        .options(defer(m.Requirement.text), defer(m.Requirement.acceptance_criterion),
                 defer(m.Requirement.created_at), defer(m.Requirement.updated_at))
        .order_by(m.Requirement.key)).all()
    held = _load_related(session, rows, scope_of)
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


def _load_related(session: Session, rows: list[m.Requirement], scope_of: list) -> list:
    """Load the evidence (by id), waivers (by id), level and product of every requirement
    of `rows` (those selected by `scope_of`) in four queries, and set them as the loaded
    relations of the rows whose relation is not loaded yet (as ``selectinload`` does).
    Returns the loaded rows: the caller holds them while it reads the relations."""
    in_scope = select(m.Requirement.id).where(*scope_of)
    evidence = session.scalars(
        select(m.Evidence).where(m.Evidence.requirement_id.in_(in_scope))
        .options(defer(m.Evidence.data), defer(m.Evidence.rationale))
        .order_by(m.Evidence.requirement_id, m.Evidence.id)).all()
    waivers = session.scalars(
        select(m.Waiver).where(m.Waiver.requirement_id.in_(in_scope))
        .order_by(m.Waiver.requirement_id, m.Waiver.id)).all()
    levels = {lv.id: lv for lv in session.scalars(
        select(m.Level).where(m.Level.id.in_(select(m.Requirement.level_id).where(*scope_of)))
        .options(selectinload(m.Level.policy)))}
    products = {p.id: p for p in session.scalars(
        select(m.Product).where(m.Product.id.in_(
            select(m.Requirement.product_id).where(*scope_of))))}
    ev_of: dict[int, list[m.Evidence]] = {}
    for ev in evidence:
        ev_of.setdefault(ev.requirement_id, []).append(ev)
    waivers_of: dict[int, list[m.Waiver]] = {}
    for w in waivers:
        waivers_of.setdefault(w.requirement_id, []).append(w)
    for req in rows:
        unloaded = inspect(req).unloaded
        if "evidence" in unloaded:
            set_committed_value(req, "evidence", ev_of.get(req.id, []))
        if "waivers" in unloaded:
            set_committed_value(req, "waivers", waivers_of.get(req.id, []))
        if "level" in unloaded:
            set_committed_value(req, "level", levels.get(req.level_id))
        if "product" in unloaded:
            set_committed_value(req, "product", products[req.product_id])
    return [evidence, waivers, levels, products]
