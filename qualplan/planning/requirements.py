"""Requirements, their evidence, waivers, and the computed status.

Status is computed, never typed: ``waived`` (an approver's waiver in force),
``open`` (no evidence), ``stale`` (the newest evidence was made against a level
whose hash differs from the requirement's current level, or the level's inputs
changed since), ``failed`` (the newest evidence fails) or ``verified``.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime

from sqlalchemy import func, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session, joinedload, selectinload

from qualplan.planning import approvals
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require_for, require_in
from qualplan.planning.catalog import check_id, get, name_key, ref_id
from qualplan.planning.errors import Conflict, NotFound, ValidationFailed, VersionMismatch
from qualplan.store import models as m
from qualplan.store.types import utcnow


@dataclass(frozen=True)
class StatusOf:
    status: s.Status
    reason: str
    evidence: m.Evidence | None
    waiver: m.Waiver | None = None
    #: The evidence's margins split by cause (``planning.margins``), when computed.
    margins: object | None = None


def create_requirement(session: Session, actor: Actor, cmd: s.RequirementCreate) -> m.Requirement:
    get(session, m.Program, cmd.program_id, "program")
    require_in(session, actor, cmd.program_id, m.Role.engineer, "creating a requirement")
    product = get(session, m.Product, cmd.product_id, "product")
    if product.program_id != cmd.program_id:
        raise ValidationFailed("product_id", cmd.product_id, "belongs to another program")
    if cmd.level_id is not None:
        _check_level(session, cmd.level_id, product)
    try:
        with session.begin_nested():
            req = m.Requirement(**cmd.model_dump())
            session.add(req)
            session.flush()
    except IntegrityError as exc:
        raise Conflict(f"requirement key {cmd.key!r} exists already in this program") from exc
    record(session, actor, "create", "requirement", req.id, key=req.key)
    return req


def _check_level(session: Session, level_id: int, product: m.Product) -> m.Level:
    level = get(session, m.Level, level_id, "level")
    if level.product_id != product.id:
        raise ValidationFailed(
            "level_id", level_id, f"the level belongs to another product than {product.name!r}"
        )
    return level


def update_requirement(
    session: Session, actor: Actor, requirement_id: int, cmd: s.RequirementUpdate
) -> m.Requirement:
    """Edit a requirement made from version `cmd.expected_version` (else VersionMismatch)."""
    req = get(session, m.Requirement, requirement_id, "requirement")
    require_for(session, actor, req, m.Role.engineer, "editing a requirement")
    if req.version != cmd.expected_version:
        raise VersionMismatch("requirement", req.key, cmd.expected_version, req.version)
    changes = cmd.model_dump(exclude_unset=True, exclude={"expected_version"})
    for key, value in changes.items():
        if value is None and key != "level_id":
            raise ValidationFailed(key, None, "cannot be null (only level_id may be cleared)")
    if "level_id" in changes and changes["level_id"] is not None:
        _check_level(session, changes["level_id"], req.product)
    for key, value in changes.items():
        setattr(req, key, value)
    req.updated_at = utcnow()
    session.flush()  # the version column refuses a concurrent commit of the same version
    record(
        session,
        actor,
        "update",
        "requirement",
        req.id,
        key=req.key,
        fields=sorted(changes),
        version=req.version,
    )
    return req


def requirement_ref(session: Session, program: m.Program | None, ref: str | int) -> m.Requirement:
    if (rid := ref_id(ref)) is not None:
        return get(session, m.Requirement, rid, "requirement")
    stmt = select(m.Requirement).where(m.Requirement.key == name_key(ref))
    if program is not None:
        stmt = stmt.where(m.Requirement.program_id == program.id)
    rows = session.scalars(stmt).all()
    if len(rows) != 1:
        if not rows:
            raise NotFound("requirement", ref)
        raise Conflict(f"requirement key {ref!r} is used in several programs; give the program")
    return rows[0]


def list_requirements(
    session: Session,
    *,
    program_id: int | None = None,
    product_ids: list[int] | None = None,
    offset: int = 0,
    limit: int | None = None,
) -> list[m.Requirement]:
    stmt = select(m.Requirement)
    if program_id is not None:
        stmt = stmt.where(m.Requirement.program_id == program_id)
    if product_ids is not None:
        stmt = stmt.where(m.Requirement.product_id.in_(product_ids))
    stmt = stmt.order_by(m.Requirement.key, m.Requirement.id).offset(offset)
    if limit is not None:
        stmt = stmt.limit(limit)
    return list(session.scalars(stmt))


def requirement_page(session: Session, *, program_id: int | None = None,
                     product_ids: list[int] | None = None, offset: int = 0,
                     limit: int | None = None) -> tuple[list[s.RequirementRead], int]:
    """A page of requirements with their status, and the total count (eager loading)."""
    base = select(m.Requirement)
    if program_id is not None:
        base = base.where(m.Requirement.program_id == program_id)
    if product_ids is not None:
        base = base.where(m.Requirement.product_id.in_(product_ids))
    total = int(session.scalar(select(func.count()).select_from(base.subquery())) or 0)
    # an evidence's arrays (`data`) are not needed for a status: left in the database
    stmt = (base.options(selectinload(m.Requirement.evidence).defer(m.Evidence.data),
                         selectinload(m.Requirement.waivers),
                         selectinload(m.Requirement.level))
            .order_by(m.Requirement.key, m.Requirement.id).offset(offset))
    if limit is not None:
        stmt = stmt.limit(limit)
    found = session.scalars(stmt).all()
    cache = staleness_of(session, found)
    covs: dict = {}  # sequence coverage, once per product, axis, grade and policy
    rows = [read_requirement(session, r, level_stale=cache, coverage_cache=covs)
            for r in found]
    return rows, total


def staleness_of(session: Session, reqs) -> dict[int, list[str]]:
    """Staleness of the levels of `reqs` (the status's cache), in a few queries."""
    from qualplan.planning.levels import staleness_of_levels

    return staleness_of_levels(session, list({
        r.level_id: r.level for r in reqs if r.level is not None
        and r.method is not m.VerificationMethod.similarity}.values()))


def requirement_by_id(session: Session, requirement_id: int) -> m.Requirement:
    return get(session, m.Requirement, requirement_id, "requirement")


def traceability(
    session: Session,
    program_id: int,
    *,
    status: str | None = None,
    method: str | None = None,
    product_id: int | None = None,
    text: str | None = None,
    sort: s.TraceSort = "key",
    descending: bool = False,
) -> list[s.TraceRow]:
    """The traceability matrix of a program, filtered and sorted (the API and the web
    offer the same filters: status, method, product, text in key or wording)."""
    get(session, m.Program, program_id, "program")
    base = select(m.Requirement).where(m.Requirement.program_id == program_id)
    if status and status not in s.Status.__args__:
        raise ValidationFailed("status", status, f"must be one of {', '.join(s.Status.__args__)}")
    if method:
        if method not in {x.value for x in m.VerificationMethod}:
            raise ValidationFailed("method", method, "must be one of "
                                   + ", ".join(x.value for x in m.VerificationMethod))
        base = base.where(m.Requirement.method == m.VerificationMethod(method))
    if product_id is not None:
        base = base.where(m.Requirement.product_id == product_id)
    stmt = base.options(selectinload(m.Requirement.evidence).defer(m.Evidence.data),
                        selectinload(m.Requirement.waivers),
                        selectinload(m.Requirement.level),
                        selectinload(m.Requirement.product))
    found = session.scalars(stmt.order_by(m.Requirement.key, m.Requirement.id)).all()
    cache = staleness_of(session, found)
    covs: dict = {}  # sequence coverage, once per product, axis, grade and policy
    rows = []
    needle = (text or "").lower()
    for req in found:
        if needle and needle not in req.key.lower() and needle not in req.text.lower():
            continue
        read = read_requirement(session, req, level_stale=cache, coverage_cache=covs)
        if status and read.status != status:
            continue
        ev = req.evidence[-1] if req.evidence else None
        rows.append(s.TraceRow(
            requirement=read, product=req.product.name,
            level=f"{req.level.name} #{req.level.number}" if req.level else "",
            evidence_id=ev.id if ev else None, evidence_kind=ev.kind if ev else None,
            evidence_verdict=ev.verdict if ev else None,
            evidence_achieved_margin=ev.achieved_margin if ev else None,
            evidence_at=ev.created_at if ev else None))
    keyf = {
        "key": lambda r: r.requirement.key, "product": lambda r: r.product,
        "level": lambda r: r.level, "method": lambda r: r.requirement.method.value,
        "status": lambda r: r.requirement.status,
        "evidence": lambda r: r.evidence_at.isoformat() if r.evidence_at else "",
    }
    if sort not in keyf:
        raise ValidationFailed("sort", sort, f"must be one of {', '.join(keyf)}")
    return sorted(rows, key=keyf[sort], reverse=descending)


def active_waiver(req: m.Requirement, now: datetime | None = None) -> m.Waiver | None:
    now = now or datetime.now(UTC)
    for w in reversed(req.waivers):
        if w.revoked_at is None and w.expires_at > now:
            return w
    return None


def status_of(
    session: Session,
    req: m.Requirement,
    *,
    level_stale: dict[int, list[str]] | None = None,
    now: datetime | None = None,
    coverage_cache: dict | None = None,
    _chain: tuple[int, ...] = (),
) -> StatusOf:
    """The requirement's status with the reason an auditor reads (`_chain`: the
    requirements whose similarity claims led here, to stop at a cycle).

    A test requirement is verified only when its newest evidence passes the level's
    tolerance, its achieved level over the limit (time compression excluded) meets the
    required margin, and, where the policy asks it for the level's grade, the test
    sequence of the level's axis covers the life (``planning.margins``).
    """
    from qualplan.planning.levels import staleness
    from qualplan.planning.margins import margins_of

    waiver = active_waiver(req, now)
    if waiver is not None:
        bare = (" WITHOUT ANY EVIDENCE (an admin's decision)"
                if waiver.without_evidence else "")
        return StatusOf(
            "waived",
            f"waived{bare} by {waiver.approver} until {waiver.expires_at:%Y-%m-%d}: "
            f"{waiver.rationale}",
            None,
            waiver,
        )
    if not req.evidence:
        return StatusOf("open", "no evidence recorded", None)
    ev = req.evidence[-1]
    if req.method is not m.VerificationMethod.similarity and req.level_id is not None:
        if ev.level_hash != req.level.level_hash:
            return StatusOf(
                "stale",
                f"evidence {ev.id} was made against level hash "
                f"{(ev.level_hash or 'none')[:12]}, the requirement now "
                f"points at {req.level.level_hash[:12]}",
                ev,
            )
        cache = level_stale if level_stale is not None else {}
        if req.level_id not in cache:
            cache[req.level_id] = staleness(session, req.level)
        if cache[req.level_id]:
            return StatusOf("stale", "; ".join(cache[req.level_id]), ev)
    if ev.summary.get("estimate_id") is not None:  # evidence from a response estimate
        from qualplan.planning.estimates import estimate_staleness

        reasons = estimate_staleness(session, ev.summary["estimate_id"])
        if reasons:
            return StatusOf("stale", "; ".join(reasons), ev)
    if ev.kind is m.EvidenceKind.similarity and ev.similar_requirement_id is not None:
        other = session.get(m.Requirement, ev.similar_requirement_id)
        chain = (*_chain, req.id)
        cycle = similarity_cycle(session, req)
        if cycle:
            return StatusOf("open", "similarity claims form a cycle ("
                            + " -> ".join(cycle) + "): no requirement of the cycle is "
                            "verified by it; record other evidence for one of them", ev)
        if other.id in chain:  # a cycle further down the claims, reported where it closes
            return StatusOf("open", f"its similarity claims lead into a cycle through "
                            f"{other.key}", ev)
        inner = status_of(session, other, level_stale=level_stale, now=now,
                          coverage_cache=coverage_cache, _chain=chain)
        if inner.status != "verified":
            return StatusOf(
                "stale" if inner.status == "stale" else "open",
                f"similar requirement {other.key} is {inner.status} ({inner.reason})",
                ev,
            )
    mg = margins_of(session, req, ev, coverage_cache if coverage_cache is not None else {})
    if ev.verdict is m.Verdict.failed:
        return StatusOf("failed", ev.summary.get("reason", "the evidence fails"), ev,
                        margins=mg)
    if mg.analysis_ms is not None and mg.analysis_ms < req.required_margin:
        return StatusOf("failed", f"analysis MS {mg.analysis_ms:+.3f} is below the "
                        f"required {req.required_margin:+.3f}", ev, margins=mg)
    got = mg.achieved_over_limit_db
    if got is not None and got < req.required_margin:
        return StatusOf(
            "failed",
            f"achieved level {got:+.2f} dB over the limit (time compression excluded) is "
            f"below the required {req.required_margin:+.2f} dB",
            ev, margins=mg,
        )
    if mg.coverage_required and mg.covers_life is False:
        return StatusOf("open", "; ".join(mg.coverage_reasons)
                        or "level does not cover the life", ev, margins=mg)
    return StatusOf("verified", ev.summary.get("reason", "evidence passes"), ev, margins=mg)


def similarity_cycle(session: Session, req: m.Requirement) -> list[str] | None:
    """The keys of the cycle the newest similarity claims form from `req` back to it
    (["A", "B", "A"]), or None; walked iteratively, so a long chain cannot overflow."""
    keys, seen, hop = [req.key], {req.id}, req
    while hop.evidence and hop.evidence[-1].similar_requirement_id is not None:
        nxt = session.get(m.Requirement, hop.evidence[-1].similar_requirement_id)
        if nxt is None:
            return None
        keys.append(nxt.key)
        if nxt.id == req.id:
            return keys
        if nxt.id in seen:  # a cycle that does not pass through req
            return None
        seen.add(nxt.id)
        hop = nxt
    return None


def requirement_read(session: Session, requirement_id: int) -> tuple[s.RequirementRead, int]:
    """One requirement with its status, and its version (the ETag), by id: its waivers
    joined to its row, its evidence in one more statement with the arrays left in the
    database (a status reads none), as a page of them loads them (NotFound when it is not
    found, or not in the caller's programs)."""
    check_id(requirement_id, "requirement")
    req = session.scalars(
        select(m.Requirement).where(m.Requirement.id == requirement_id)
        .options(joinedload(m.Requirement.waivers),
                 selectinload(m.Requirement.evidence).defer(m.Evidence.data))).unique().first()
    if req is None:
        raise NotFound("requirement", requirement_id)
    return read_requirement(session, req), req.version


def read_requirement(session: Session, req: m.Requirement, **kw) -> s.RequirementRead:
    out = s.RequirementRead.model_validate(req)
    st = status_of(session, req, **kw)
    out.status, out.status_reason = st.status, st.reason
    return out


def waive(session: Session, actor: Actor, requirement_id: int, cmd: s.WaiverIn) -> m.Waiver:
    """An approver waives a requirement (the rules are in :mod:`qualplan.planning.approvals`)."""
    return approvals.waive(session, actor, requirement_id, cmd)


def revoke_waiver(session: Session, actor: Actor, waiver_id: int) -> m.Waiver:
    w = get(session, m.Waiver, waiver_id, "waiver")
    require_for(session, actor, w, m.Role.approver, "revoking a waiver")
    if w.revoked_at is not None:
        raise Conflict(f"waiver {waiver_id} is revoked already")
    w.revoked_at = utcnow()
    session.flush()
    record(session, actor, "revoke", "waiver", w.id, requirement=w.requirement_id)
    return w
