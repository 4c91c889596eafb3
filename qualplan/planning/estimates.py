"""Whether a response estimate (planning.modal) still reflects its inputs: the modal
summary's revision and the level it was made from. Its own module so that a
requirement's status can ask without importing the modal use cases."""

from __future__ import annotations

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from qualplan.planning.catalog import get
from qualplan.planning.levels import staleness
from qualplan.store import models as m


def latest_revision(session: Session, summary_id: int) -> m.ModalSummaryRevision | None:
    return session.scalar(
        select(m.ModalSummaryRevision)
        .where(m.ModalSummaryRevision.summary_id == summary_id)
        .order_by(m.ModalSummaryRevision.number.desc())
        .limit(1)
    )


def estimate_staleness(session: Session, estimate: m.ResponseEstimate | int) -> list[str]:
    """Why an estimate no longer reflects its inputs (empty when it is current)."""
    est = estimate if isinstance(estimate, m.ResponseEstimate) else \
        get(session, m.ResponseEstimate, int(estimate), "response estimate")
    reasons = []
    rev = est.modal_revision
    latest = latest_revision(session, rev.summary_id)
    if latest is not None and latest.number != rev.number:
        reasons.append(f"modal summary {rev.summary.name!r} has revision {latest.number}, the "
                       f"estimate used revision {rev.number}")
    level = est.level
    newest = session.scalar(select(func.max(m.Level.number)).where(
        m.Level.product_id == level.product_id, m.Level.name == level.name))
    if newest is not None and newest != level.number:
        reasons.append(f"level {level.name!r} has number {newest}, the estimate used "
                       f"number {level.number}")
    reasons.extend(f"level {level.name!r}: {r}" for r in staleness(session, level))
    return reasons
