"""The life cycle of a product and axis, and the coverage of a level against it.

Each environment of the life becomes an *exposure* of the numeric core (a PSD over
a duration, a sweep repeated, a shock repeated, a record replayed); its FDS and
ERS on the policy's natural-frequency grid come from ``qualplan.dynamics.fatigue``
and ``qualplan.dynamics.extreme``; the life's FDS is the Miner sum over phases and
its ERS the maximum. The ratios test/life are formed by the equivalence engine
(``qualplan.dynamics.equivalence``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.dynamics import equivalence as core_eq
from qualplan.dynamics import sine as core_sine
from qualplan.dynamics import srs as core_srs
from qualplan.planning import envdata
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.repositories import RevisionRepository

K = m.EnvironmentKind


@dataclass(frozen=True)
class LifeItem:
    environment: m.Environment
    revision: m.EnvironmentRevision

    @property
    def label(self) -> str:
        phase = self.environment.phase.name if self.environment.phase else "no phase"
        return f"{self.environment.name} r{self.revision.number} ({phase})"


def life_cycle(session: Session, product: m.Product, axis: m.Axis) -> list[LifeItem]:
    """Latest revision of every environment of the product (and its parents) on `axis`."""
    from qualplan.planning.levels import _lineage

    ids = _lineage(session, product)
    stmt = select(m.Environment).where(m.Environment.product_id.in_(ids))
    if axis is not m.Axis.all:
        stmt = stmt.where(m.Environment.axis.in_([axis, m.Axis.all]))
    revs = RevisionRepository(session)
    out = []
    for env in session.scalars(stmt.order_by(m.Environment.id)):
        latest = revs.latest(env.id)
        if latest is not None:
            out.append(LifeItem(env, latest))
    return out


def exposure_of_environment(item: LifeItem) -> core_eq.Exposure:
    """The core's exposure object for one life-cycle environment."""
    from qualplan.planning.levels import exposure

    env, rev = item.environment, item.revision
    amount, _unit = exposure(env, rev)
    spec = rev.spec
    if env.kind is K.random:
        return core_eq.RandomExposure(
            item.label, np.asarray(spec["freq_hz"]), np.asarray(spec["asd_g2_hz"]), amount
        )
    if env.kind is K.sine:
        return core_eq.SweepExposure(item.label, envdata.sweep_of(spec), amount)
    if env.kind is K.shock:
        return core_eq.SrsExposure(
            item.label, core_srs.SrsProfile(spec["freq_hz"], spec["accel_g"]), spec["q"], amount
        )
    return core_eq.TimeExposure(item.label, np.asarray(rev.data), spec["dt_s"], amount)


def exposure_of_level(kind: str, result: dict[str, Any]) -> core_eq.Exposure:
    """The core's exposure object for a derived test level (per axis)."""
    if kind == "random":
        return core_eq.RandomExposure(
            "test level",
            np.asarray(result["freq_hz"]),
            np.asarray(result["asd_g2_hz"]),
            result["duration_s"],
        )
    if kind == "sine":
        sweep = core_sine.Sweep(
            core_sine.SineTable(result["freq_hz"], result["accel_g"]),
            result["sweep_rate_oct_per_min"],
            direction=result["direction"],
            n_sweeps=result["sweeps"],
        )
        return core_eq.SweepExposure("test level", sweep, 1.0)
    return core_eq.SrsExposure(
        "test level",
        core_srs.SrsProfile(result["freq_hz"], result["accel_g"]),
        result["q"],
        float(result["shocks_per_axis"]),
    )


def coverage_of_level(
    kind: str, result: dict[str, Any], life: list[LifeItem], rules: s.PolicyRules
) -> dict[str, Any]:
    """FDS and ERS coverage of the level against the life cycle, per b, as plain data."""
    eq = rules.equivalence
    if not life:
        return {"fn_hz": [], "note": "no environment in the life cycle of this axis"}
    fn = core_srs.octave_grid(eq.f_lo_hz, eq.f_hi_hz, eq.points_per_octave)
    report = core_eq.coverage(
        [exposure_of_level(kind, result)],
        [exposure_of_environment(x) for x in life],
        fn,
        q=eq.q,
        b=eq.b,
        fds_margin_db=eq.fds_margin_db,
        ers_margin_db=eq.ers_margin_db,
        overtest_limit_db=eq.overtest_limit_db,
    )
    out = report.as_dict()
    out["life"] = [x.label for x in life]
    return out
