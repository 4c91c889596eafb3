"""Which environments and levels are withdrawn, superseded or replaced (by a transferred
environment), and why (queries only).

The life cycle (``planning.lifecycle``), the derivations and staleness
(``planning.levels``) and the baselines of documents read these; the use cases that
withdraw and supersede are in ``planning.approvals``. This module imports only the
store, so every planning module may read it without an import circle.
"""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.store import models as m


def withdrawn_environment_ids(session: Session) -> dict[int, m.Withdrawal]:
    """Withdrawals of environments, by environment id."""
    rows = session.scalars(select(m.Withdrawal).where(m.Withdrawal.environment_id.is_not(None)))
    return {w.environment_id: w for w in rows}


def environment_withdrawal(session: Session, environment_id: int) -> m.Withdrawal | None:
    return session.scalar(select(m.Withdrawal).where(
        m.Withdrawal.environment_id == environment_id))


def level_withdrawal(session: Session, level_id: int) -> m.Withdrawal | None:
    return session.scalar(select(m.Withdrawal).where(m.Withdrawal.level_id == level_id))


def withdrawn_level_ids(session: Session) -> set[int]:
    return set(session.scalars(select(m.Withdrawal.level_id).where(
        m.Withdrawal.level_id.is_not(None))))


def superseded_by(session: Session, level_id: int) -> m.LevelSupersession | None:
    """The supersession of a level by its re-derivation, when there is one."""
    return session.scalar(select(m.LevelSupersession).where(
        m.LevelSupersession.old_level_id == level_id))


def describe(w: m.Withdrawal) -> str:
    """``withdrawn by NAME on DATE: REASON``."""
    return f"withdrawn by {w.actor} on {w.created_at:%Y-%m-%d}: {w.reason}"


def replaced_environment_ids(session: Session, product: m.Product) -> set[int]:
    """Environments of the product's ancestors that a transferred environment of the
    product (or of an ancestor below them) replaces in the product's life cycle."""
    lineage, p = [product.id], product
    while p.parent_id is not None:
        p = session.get(m.Product, p.parent_id)
        lineage.append(p.id)
    replaced: set[int] = set()
    rows = session.scalars(select(m.EnvironmentDerivation)
                           .where(m.EnvironmentDerivation.product_id.in_(lineage)))
    for d in rows:
        replaced.update(int(x) for x in d.recipe.get("parent_environment_ids", []))
    return replaced
