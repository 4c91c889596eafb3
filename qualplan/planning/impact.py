"""Change impact: what a new revision of an environment makes stale, before or after it.

A level depends on an environment when one of its input revisions belongs to it, or,
for a test level, when the environment is in the life cycle the level's coverage was
judged against (an analysis level does not depend on the life: it carries no coverage).
A requirement depends on the environment through its level, and through a similarity
claim on a requirement that does. A document depends on it through the levels it issued
(specifications) or the requirements it audited (audit reports).

Asked before a revision is made, the answer is what the next revision would make stale;
asked after, the same items are stale already (the level used an older revision).
"""

from __future__ import annotations

from pydantic import BaseModel
from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.planning.catalog import get
from qualplan.store import models as m
from qualplan.store.repositories import RevisionRepository


class ImpactLevel(BaseModel):
    level_id: int
    level: str
    purpose: str
    axis: str
    #: "input" (a revision of the environment is an input) or "life cycle" (the
    #: environment is in the life a test level's coverage was judged against).
    through: str
    revision_used: int
    latest_revision: int
    #: True when the level used an older revision than the latest: stale already.
    stale_already: bool


class ImpactRequirement(BaseModel):
    requirement_id: int
    key: str
    method: str
    #: How it depends on the environment, in words.
    through: str
    has_evidence: bool


class ImpactDocument(BaseModel):
    document_id: int
    number: str
    revision: int
    kind: str
    through: str


class Impact(BaseModel):
    environment_id: int
    environment: str
    latest_revision: int | None
    levels: list[ImpactLevel]
    requirements: list[ImpactRequirement]
    documents: list[ImpactDocument]
    summary: str


def _newest(levels: list[m.Level]) -> list[m.Level]:
    newest: dict[tuple[int, str], m.Level] = {}
    for lv in levels:
        k = (lv.product_id, lv.name)
        if k not in newest or lv.number > newest[k].number:
            newest[k] = lv
    return list(newest.values())


def environment_impact(session: Session, environment_id: int) -> Impact:
    """The levels, requirements and documents a new revision of the environment would
    make stale (or, once revised, has made stale)."""
    env = get(session, m.Environment, environment_id, "environment")
    revs = RevisionRepository(session)
    numbers = {r.id: r.number for r in env.revisions}
    latest = revs.latest(env.id)
    latest_n = latest.number if latest is not None else None
    program_id = env.product.program_id
    product_ids = list(session.scalars(
        select(m.Product.id).where(m.Product.program_id == program_id)))
    all_levels = list(session.scalars(
        select(m.Level).where(m.Level.product_id.in_(product_ids)).order_by(m.Level.id)))
    pointed = set(session.scalars(
        select(m.Requirement.level_id).where(m.Requirement.program_id == program_id,
                                             m.Requirement.level_id.is_not(None))))
    candidates = {lv.id: lv for lv in _newest(all_levels)}
    candidates.update({lv.id: lv for lv in all_levels if lv.id in pointed})
    hit_levels: list[ImpactLevel] = []
    for lv in sorted(candidates.values(), key=lambda x: x.id):
        hashes = lv.input_hashes or {}
        through, used = None, None
        for rid in hashes.get("revisions", {}):
            if int(rid) in numbers:
                through, used = "input", numbers[int(rid)]
        if through is None and lv.purpose is m.LevelPurpose.test:
            for rid in hashes.get("life_cycle", {}):
                if int(rid) in numbers:
                    through, used = "life cycle", numbers[int(rid)]
        if through is None:
            continue
        hit_levels.append(ImpactLevel(
            level_id=lv.id, level=f"{lv.name} #{lv.number}", purpose=lv.purpose.value,
            axis=lv.axis.value, through=through, revision_used=used,
            latest_revision=latest_n or used,
            stale_already=latest_n is not None and used != latest_n))
    level_ids = {x.level_id for x in hit_levels}
    reqs = list(session.scalars(select(m.Requirement).where(
        m.Requirement.program_id == program_id).order_by(m.Requirement.key)))
    hit: dict[int, ImpactRequirement] = {}
    for req in reqs:
        if req.level_id in level_ids:
            lv = candidates[req.level_id]
            hit[req.id] = ImpactRequirement(
                requirement_id=req.id, key=req.key, method=req.method.value,
                through=f"its level {lv.name} #{lv.number}", has_evidence=bool(req.evidence))
    grew = True
    while grew:  # similarity claims on an affected requirement, to closure
        grew = False
        for req in reqs:
            if req.id in hit or not req.evidence:
                continue
            other = req.evidence[-1].similar_requirement_id
            if other is not None and other in hit:
                hit[req.id] = ImpactRequirement(
                    requirement_id=req.id, key=req.key, method=req.method.value,
                    through=f"its similarity claim on {hit[other].key}", has_evidence=True)
                grew = True
    keys = {x.key for x in hit.values()}
    docs: list[ImpactDocument] = []
    for doc in session.scalars(select(m.Document).where(
            m.Document.program_id == program_id).order_by(m.Document.id)):
        h = doc.input_hashes or {}
        issued = sorted(int(i) for i in h.get("levels", {}) if int(i) in level_ids)
        audited = sorted(k for k in h.get("requirements", {}) if k in keys)
        if issued:
            names = ", ".join(next(x.level for x in hit_levels if x.level_id == i)
                              for i in issued)
            docs.append(ImpactDocument(document_id=doc.id, number=doc.number,
                                       revision=doc.revision, kind=doc.kind.value,
                                       through=f"issues {names}"))
        elif audited:
            docs.append(ImpactDocument(document_id=doc.id, number=doc.number,
                                       revision=doc.revision, kind=doc.kind.value,
                                       through=f"audits {', '.join(audited)}"))
    already = sum(x.stale_already for x in hit_levels)
    summary = (f"a new revision of {env.name!r} would make {len(hit_levels)} level(s), "
               f"{len(hit)} requirement(s) and {len(docs)} document(s) stale")
    if already:
        summary += (f"; {already} of the levels used an older revision than "
                    f"r{latest_n} and are stale already")
    return Impact(environment_id=env.id, environment=env.name, latest_revision=latest_n,
                  levels=hit_levels, requirements=list(hit.values()), documents=docs,
                  summary=summary)
