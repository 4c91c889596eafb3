"""Withdrawal, waiver requests, waivers under the policy's two-person rule, and the
sign-off of issued documents.

Every role these use cases need is in :data:`ROLES` and checked by :func:`check`, so a
change of how roles are held (per program) is made here once.

- Withdrawal takes an environment or a level out of the life cycle, the derivations
  and the default baselines (``planning.withdrawals`` answers "is it withdrawn?"); the
  row and its reason stay in history, and the levels and requirements that used it
  become stale.
- A waiver has a reason and an expiry within the policy's ``max_waiver_days`` (365 by
  default). Where the policy's ``two_person`` asks it for the grade (qualification by
  default), the approver is neither an author of the requirement's evidence nor the one
  who requested the waiver. Waiving a requirement with no evidence at all needs the
  admin role and is marked on the waiver (and so in the audit). The two-person rule is
  common practice in configuration control (no one approves their own work); the
  defaults are the project's own, not a standard's.
- A document revision is signed in three roles (prepared, checked, approved) by three
  distinct users, each with the time of signing; approval comes last.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require
from qualplan.planning.catalog import get
from qualplan.planning.errors import Conflict, PermissionDenied, ValidationFailed
from qualplan.planning.policies import rules_of
from qualplan.planning.withdrawals import describe, environment_withdrawal, level_withdrawal
from qualplan.store import models as m

#: The role each action needs (one place; see the module docstring).
ROLES: dict[str, m.Role] = {
    "withdrawing an environment": m.Role.engineer,
    "withdrawing a level": m.Role.engineer,
    "requesting a waiver": m.Role.engineer,
    "waiving a requirement": m.Role.approver,
    "waiving a requirement that has no evidence": m.Role.admin,
    "signing a document as prepared": m.Role.engineer,
    "signing a document as checked": m.Role.engineer,
    "signing a document as approved": m.Role.approver,
}

SIGNOFF_ORDER = (m.SignoffRole.prepared, m.SignoffRole.checked, m.SignoffRole.approved)


def check(actor: Actor, action: str) -> None:
    """PermissionDenied unless `actor` may do `action` (a key of :data:`ROLES`)."""
    require(actor, ROLES[action], action)


def _reason(field: str, text: str) -> str:
    text = (text or "").strip()
    if len(text) < 10:
        raise ValidationFailed(field, text, "must say why, in at least 10 characters")
    return text


# --- withdrawal ---------------------------------------------------------------------------


def withdraw_environment(session: Session, actor: Actor, environment_id: int, reason: str
                         ) -> m.Withdrawal:
    """Withdraw an environment (all its revisions) from the life cycle, with a reason."""
    check(actor, "withdrawing an environment")
    env = get(session, m.Environment, environment_id, "environment")
    reason = _reason("reason", reason)
    if (w := environment_withdrawal(session, env.id)) is not None:
        raise Conflict(f"environment {env.name!r} is {describe(w)}")
    row = m.Withdrawal(environment_id=env.id, reason=reason, actor=actor.name)
    session.add(row)
    session.flush()
    record(session, actor, "withdraw", "environment", env.id, name=env.name, reason=reason)
    return row


def withdraw_level(session: Session, actor: Actor, level_id: int, reason: str) -> m.Withdrawal:
    """Withdraw a level from the baselines and the derivations, with a reason."""
    check(actor, "withdrawing a level")
    level = get(session, m.Level, level_id, "level")
    reason = _reason("reason", reason)
    if (w := level_withdrawal(session, level.id)) is not None:
        raise Conflict(f"level {level.name} #{level.number} is {describe(w)}")
    row = m.Withdrawal(level_id=level.id, reason=reason, actor=actor.name)
    session.add(row)
    session.flush()
    record(session, actor, "withdraw", "level", level.id, name=level.name,
           number=level.number, reason=reason)
    return row


def withdrawals(session: Session) -> list[m.Withdrawal]:
    return list(session.scalars(select(m.Withdrawal).order_by(m.Withdrawal.id)))


# --- waivers ------------------------------------------------------------------------------


def request_waiver(session: Session, actor: Actor, requirement_id: int,
                   cmd: s.WaiverRequestIn) -> m.WaiverRequest:
    """An engineer asks that a requirement be waived (an approver decides)."""
    check(actor, "requesting a waiver")
    req = get(session, m.Requirement, requirement_id, "requirement")
    row = m.WaiverRequest(requirement_id=req.id, requested_by=actor.name,
                          reason=_reason("reason", cmd.reason))
    session.add(row)
    session.flush()
    record(session, actor, "request-waiver", "requirement", req.id, key=req.key,
           request=row.id)
    return row


def waiver_requests(session: Session, requirement_id: int) -> list[m.WaiverRequest]:
    return list(session.scalars(select(m.WaiverRequest).where(
        m.WaiverRequest.requirement_id == requirement_id).order_by(m.WaiverRequest.id)))


def approval_rule(session: Session, req: m.Requirement) -> tuple[s.ApprovalRule, str | None]:
    """The approval rule of the requirement's level's policy (shipped defaults without
    one) and the level's grade (None without a level)."""
    level = req.level
    if level is not None and level.policy is not None:
        rule = rules_of(level.policy).approvals
    else:
        rule = s.ApprovalRule()
    return rule, (level.grade.value if level is not None and level.grade else None)


def two_person_applies(rule: s.ApprovalRule, grade: str | None) -> bool:
    """Whether the two-person rule holds; without a grade (no level) it does, the
    stricter choice (common practice)."""
    if grade is None:
        return True
    return bool(rule.two_person.get(m.Grade(grade), False))


def waive(session: Session, actor: Actor, requirement_id: int, cmd: s.WaiverIn) -> m.Waiver:
    """An approver waives a requirement until `expires_at` (within the policy's
    ``max_waiver_days``), with a rationale; see the module docstring for the rules."""
    check(actor, "waiving a requirement")
    req = get(session, m.Requirement, requirement_id, "requirement")
    rationale = _reason("rationale", cmd.rationale)
    rule, grade = approval_rule(session, req)
    now = datetime.now(UTC)
    expires = cmd.expires_at if cmd.expires_at.tzinfo else cmd.expires_at.replace(tzinfo=UTC)
    if expires <= now:
        raise ValidationFailed("expires_at", cmd.expires_at.isoformat(), "must lie in the future")
    if expires > now + timedelta(days=rule.max_waiver_days):
        raise ValidationFailed("expires_at", cmd.expires_at.isoformat(),
                               f"must lie within {rule.max_waiver_days} days (the policy's "
                               "max_waiver_days: a waiver is temporary)")
    requests = waiver_requests(session, req.id)
    answered = {w.request_id for w in req.waivers if w.request_id is not None}
    request = None
    if cmd.request_id is not None:
        request = next((x for x in requests if x.id == cmd.request_id), None)
        if request is None:
            raise ValidationFailed("request_id", cmd.request_id,
                                   f"is not a waiver request of requirement {req.key}")
    else:
        request = next((x for x in reversed(requests) if x.id not in answered), None)
    without_evidence = not req.evidence
    if without_evidence:
        try:
            check(actor, "waiving a requirement that has no evidence")
        except PermissionDenied as exc:
            raise PermissionDenied(f"requirement {req.key} has no evidence at all: {exc}") from exc
    if two_person_applies(rule, grade):
        authors = sorted({e.author for e in req.evidence})
        if actor.name in authors:
            raise PermissionDenied(
                f"the policy asks two persons for {grade or 'a requirement without a level'}: "
                f"{actor.name} recorded evidence of {req.key} and may not waive it")
        if request is not None and request.requested_by == actor.name:
            raise PermissionDenied(
                f"the policy asks two persons for {grade or 'a requirement without a level'}: "
                f"{actor.name} requested this waiver and may not approve it")
    w = m.Waiver(requirement_id=req.id, approver=actor.name, rationale=rationale,
                 expires_at=expires, request_id=request.id if request else None,
                 without_evidence=without_evidence)
    session.add(w)
    session.flush()
    session.refresh(req, ["waivers"])
    record(session, actor, "waive", "requirement", req.id, key=req.key, waiver=w.id,
           expires_at=expires.isoformat(), request=w.request_id,
           requested_by=request.requested_by if request else None,
           without_evidence=without_evidence)
    return w


# --- sign-off -----------------------------------------------------------------------------


def signoffs(session: Session, document_id: int) -> list[m.Signoff]:
    rows = session.scalars(select(m.Signoff).where(m.Signoff.document_id == document_id))
    return sorted(rows, key=lambda x: SIGNOFF_ORDER.index(x.role))


def sign_document(session: Session, actor: Actor, document_id: int,
                  role: m.SignoffRole | str) -> m.Signoff:
    """Sign the issued document revision `document_id` as prepared, checked or approved.

    Three distinct users sign the three roles; a user signs once per revision; the
    approval comes after the other two; only the latest revision of a number is signed.
    """
    try:
        role = m.SignoffRole(role)
    except ValueError as exc:
        raise ValidationFailed("role", role, "must be prepared, checked or approved") from exc
    check(actor, f"signing a document as {role.value}")
    doc = get(session, m.Document, document_id, "document")
    latest = session.scalar(select(m.Document).where(m.Document.number == doc.number)
                            .order_by(m.Document.revision.desc()).limit(1))
    if latest.id != doc.id:
        raise Conflict(f"{doc.number} revision {doc.revision} is superseded by revision "
                       f"{latest.revision}: sign that one")
    done = {x.role: x for x in signoffs(session, doc.id)}
    if role in done:
        raise Conflict(f"{doc.number} revision {doc.revision} is signed as {role.value} "
                       f"already, by {done[role].user_name}")
    mine = [x for x in done.values() if x.user_name == actor.name]
    if mine:
        raise Conflict(f"{actor.name} signed {doc.number} revision {doc.revision} as "
                       f"{mine[0].role.value} already: the three roles need three "
                       "distinct users")
    if role is m.SignoffRole.approved and len(done) < 2:
        missing = [r.value for r in SIGNOFF_ORDER[:2] if r not in done]
        raise Conflict(f"{doc.number} revision {doc.revision} is approved after it is "
                       f"{' and '.join(missing)}")
    row = m.Signoff(document_id=doc.id, role=role, user_name=actor.name)
    session.add(row)
    session.flush()
    record(session, actor, "sign", "document", doc.id, number=doc.number,
           revision=doc.revision, role=role.value)
    return row
