"""The life cycle of a product: phases, the environments that apply to a product and
axis (its own and its parents'), their exposures, and the current test levels.

Both the derivation of levels (``planning.levels``) and their coverage of the life
(``planning.coverage``) read the life cycle from here; neither imports the other.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from qualplan.planning import envdata
from qualplan.planning.errors import ValidationFailed
from qualplan.planning.withdrawals import (
    replaced_environment_ids,
    withdrawn_environment_ids,
    withdrawn_level_ids,
)
from qualplan.store import models as m
from qualplan.store.repositories import LevelRepository, RevisionRepository

K = m.EnvironmentKind


@dataclass(frozen=True)
class LifeItem:
    """One environment revision with its environment (a level's input or a life item)."""

    environment: m.Environment
    revision: m.EnvironmentRevision

    @property
    def label(self) -> str:
        """Name and revision, e.g. ``road Z r2``."""
        return f"{self.environment.name} r{self.revision.number}"

    @property
    def life_label(self) -> str:
        """Name, revision and phase, as the life cycle lists it."""
        phase = self.environment.phase.name if self.environment.phase else "no phase"
        return f"{self.label} ({phase})"


def lineage(session: Session, product: m.Product) -> list[int]:
    """The product and its ancestors (an environment of a parent applies to its units)."""
    ids, p = [], product
    while p is not None:
        ids.append(p.id)
        p = session.get(m.Product, p.parent_id) if p.parent_id else None
    return ids


def life_cycle(session: Session, product: m.Product, axis: m.Axis) -> list[LifeItem]:
    """Latest revision of every environment of the product (and its parents) on `axis`;
    withdrawn environments have left the life cycle."""
    stmt = select(m.Environment).where(m.Environment.product_id.in_(lineage(session, product)))
    if axis is not m.Axis.all:
        stmt = stmt.where(m.Environment.axis.in_([axis, m.Axis.all]))
    revs = RevisionRepository(session)
    out = []
    # a parent's environment that a transfer carried down is replaced by the transferred one
    replaced = replaced_environment_ids(session, product)
    withdrawn = withdrawn_environment_ids(session)
    for env in session.scalars(stmt.order_by(m.Environment.id)):
        if env.id in replaced or env.id in withdrawn:
            continue
        latest = revs.latest(env.id)
        if latest is not None:
            out.append(LifeItem(env, latest))
    return out


def timed_of_phase(session: Session, product: m.Product, phase_id: int,
                   axes: list[m.Axis]) -> dict[m.Axis, list[LifeItem]]:
    """For each of `axes`: the items of ``life_cycle(session, product, axis)`` that are of
    phase `phase_id` and of a kind in :data:`TIMED`, in one query.

    The revisions are read as their number and spec only (a transient revision of each:
    no samples unpacked nor hash checked), which is all :func:`time_counted_twice` reads;
    enough for life-cycle warnings, never for a computation on the data."""
    env, rev = m.Environment, m.EnvironmentRevision
    newest = (select(func.max(rev.number)).where(rev.environment_id == env.id)
              .correlate(env).scalar_subquery())
    wanted = {a for axis in axes for a in ((axis,) if axis is m.Axis.all else (axis, m.Axis.all))}
    stmt = (select(env, rev.id, rev.number, rev.spec)
            .join(rev, (rev.environment_id == env.id) & (rev.number == newest))
            .where(env.product_id.in_(lineage(session, product)), env.phase_id == phase_id,
                   env.kind.in_(TIMED), env.axis.in_(sorted(wanted, key=lambda a: a.value)),
                   ~select(m.Withdrawal.id).where(m.Withdrawal.environment_id == env.id)
                   .exists())
            .order_by(env.id))
    replaced = replaced_environment_ids(session, product)
    items = [LifeItem(e, m.EnvironmentRevision(id=rid, environment_id=e.id, number=number,
                                               spec=spec))
             for e, rid, number, spec in session.execute(stmt) if e.id not in replaced]
    return {axis: [x for x in items if axis is m.Axis.all
                   or x.environment.axis in (axis, m.Axis.all)] for axis in axes}


def exposure(env: m.Environment, rev: m.EnvironmentRevision) -> tuple[float, str]:
    """How much of an environment the life holds: seconds (random), sweep sequences
    (sine), shocks (shock) or passes of the record (time history).

    Rule (docs/methods/exposure.md): per occurrence of its phase an environment lasts its
    stated ``duration_s``, else its ``share`` of the phase's duration (default the whole
    phase); a shock happens ``count`` times; a sine sweep sequence runs once. The life
    holds that times the phase's occurrences.
    """
    phase = env.phase
    occurrences = phase.occurrences if phase else 1
    share = rev.spec.get("share", 1.0)
    phase_share_s = share * phase.duration_s if phase else None
    if env.kind is K.shock:
        return float(rev.spec.get("count", 1) * occurrences), "shocks"
    if env.kind is K.sine:
        return float(occurrences), "sweep sequences"
    if env.kind is K.time_history:
        record_s = np.asarray(rev.data).size * rev.spec["dt_s"]
        per = rev.spec.get("duration_s", phase_share_s if phase else record_s)
        return float(per * occurrences / record_s), "passes of the record"
    per = rev.spec.get("duration_s", phase_share_s)
    if per is None:
        raise ValidationFailed(
            "duration_s", None, f"environment {env.name!r} has neither a duration nor a phase"
        )
    return float(per * occurrences), "s"


#: Kinds that fill time of their phase and describe its broadband condition: a measured
#: record and a spectrum of one phase and axis are two views of one condition.
TIMED = (K.random, K.time_history)


def phase_share(item: LifeItem) -> float | None:
    """Fraction of its phase's time an environment fills per occurrence (its stated
    ``duration_s`` over the phase's duration, else its ``share``, default 1); None without
    a phase."""
    phase = item.environment.phase
    if phase is None or not phase.duration_s:
        return None
    spec = item.revision.spec
    if spec.get("duration_s") is not None:
        return float(spec["duration_s"]) / float(phase.duration_s)
    return float(spec.get("share", 1.0))


def time_counted_twice(life: list[LifeItem]) -> list[str]:
    """The phases of which a life cycle (one axis) counts more than the whole time:
    random spectra and records of one phase whose shares add up to more than 1 (rule of
    docs/methods/exposure.md: a condition's time is counted once; several runs of it are
    one revision, and environments that split a phase state their shares). In words, one
    per phase; empty when every phase's time is counted at most once."""
    by_phase: dict[int, list[tuple[LifeItem, float]]] = {}
    for x in life:
        if x.environment.kind in TIMED and (share := phase_share(x)) is not None:
            by_phase.setdefault(x.environment.phase_id, []).append((x, share))
    out = []
    for group in by_phase.values():
        total = sum(sh for _, sh in group)
        if len(group) > 1 and total > 1 + 1e-9:
            phase = group[0][0].environment.phase
            names = ", ".join(f"{x.label} ({x.environment.kind.value.replace('_', ' ')}, "
                              f"axis {x.environment.axis.value}, share {sh:.3g})"
                              for x, sh in group)
            out.append(f"phase {phase.name!r}: {names} together fill "
                       f"{total:.3g} times the phase's time; if they describe one condition "
                       "the life counts it more than once (import the runs as one revision, "
                       "state each environment's share, or withdraw the duplicate)")
    return out


def check_exposure(item: LifeItem, field: str = "revision_ids") -> None:
    """Refuse (at derivation) an environment lasting longer than its share of its phase."""
    env, rev = item.environment, item.revision
    if env.phase is None:
        return
    samples = None if rev.data is None else np.asarray(rev.data).size
    envdata.check_exposure(env.kind, rev.spec, samples, env.phase.name,
                           env.phase.duration_s, field=f"{field} ({item.label})")


def exposure_s(item: LifeItem) -> float:
    """Exposure time of a random environment, a record or a sine sweep sequence over the
    life [s] (a sine: sweep time x sweeps x occurrences)."""
    amount, unit = exposure(item.environment, item.revision)
    if unit == "sweep sequences":
        return amount * envdata.sweep_of(item.revision.spec).duration_s
    if unit == "shocks":
        raise ValidationFailed("revision_ids", item.revision.id,
                               f"{item.label} is a shock; it has no exposure time")
    if unit == "s":
        return amount
    rev = item.revision
    return amount * np.asarray(rev.data).size * rev.spec["dt_s"]


def current_test_levels(session: Session, product_id: int, grade: m.Grade) -> list[m.Level]:
    """The newest number of every test level of a product for a grade; a withdrawn level
    is not current (nor does an older number take its place)."""
    newest: dict[str, m.Level] = {}
    for lvl in LevelRepository(session).list(product_id=product_id):
        if lvl.purpose is not m.LevelPurpose.test or lvl.grade is not m.Grade(grade):
            continue
        if lvl.name not in newest or lvl.number > newest[lvl.name].number:
            newest[lvl.name] = lvl
    withdrawn = withdrawn_level_ids(session)
    return [lvl for lvl in newest.values() if lvl.id not in withdrawn]
