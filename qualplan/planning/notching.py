"""Response-limit notching of a test level, stored with the level.

A hard-mounted test over-tests a unit at its resonances. Given a response limit at a
control or monitor location (a peak acceleration [g] for sine, an ASD [g^2/Hz] for
random; a load limit divided by the load per g of response takes the same form) and the
transmissibility |T(f)| from the input to that location (measured in a low-level survey
or from an analysis), the notched input is the input lowered to limit / |T| where the
response would exceed the limit: a_n = min(a, L / |T|) for sine and
S_n = min(S, L / |T|^2) for random (NASA-HDBK-7004C, response limiting; the quasi-steady
assumption: a slow sweep, a stationary random input). One implementation does both
kinds (:func:`qualplan.dynamics.transfer.notch_sine` and
:func:`~qualplan.dynamics.transfer.notch_random`, both through
:func:`qualplan.dynamics.sine.notch`).

Each notching is a new append-only row of the level (``level_notchings``) with its
inputs, the level hash it was made against, the notched input and each notch's depth
and width; a notch deeper than the maximum given needs an approver's acceptance, which
is recorded as the level's next row and an event. The specification prints the newest.
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Literal

import numpy as np
from pydantic import BaseModel, Field, model_validator
from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.dynamics import psd as core_psd
from qualplan.dynamics import sine as core_sine
from qualplan.dynamics import transfer as core_tr
from qualplan.planning import envdata
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require_for
from qualplan.planning.catalog import get
from qualplan.planning.errors import Conflict, ValidationFailed
from qualplan.planning.levels import result_of
from qualplan.planning.policies import rules_of
from qualplan.store import models as m

K = m.EnvironmentKind
Source = Literal["low-level survey", "analysis"]
METHOD = ("response limiting (NASA-HDBK-7004C): input lowered to limit / |T| where the "
          "response through the transmissibility would exceed the limit; quasi-steady "
          "response assumed")


class NotchingIn(s.Command):
    """A response limit at a location and the transmissibility to it."""

    location: str = Field(min_length=1, max_length=200,
                          description="control or monitor location, e.g. 'monitor A3 on the "
                                      "power supply board'")
    #: A constant limit: g peak (sine) or g^2/Hz (random).
    limit: float | None = Field(default=None, gt=0)
    #: Or a limit table: frequencies [Hz] and limits (g peak or g^2/Hz).
    limit_freq_hz: list[float] | None = None
    limit_values: list[float] | None = None
    transmissibility_freq_hz: list[float] = Field(min_length=2)
    #: |response / input| [g/g].
    transmissibility_gain: list[float] = Field(min_length=2)
    transmissibility_source: Source
    transmissibility_note: str = ""
    #: Deepest notch accepted without an approver [dB].
    max_notch_db: float | None = Field(default=None, gt=0)
    note: str = ""

    @model_validator(mode="after")
    def _one_limit(self):
        table = self.limit_freq_hz is not None or self.limit_values is not None
        if (self.limit is None) == (not table):
            raise ValueError("give either limit (a constant) or limit_freq_hz with "
                             "limit_values (a table), not both")
        if table and (self.limit_freq_hz is None or self.limit_values is None
                      or len(self.limit_freq_hz) != len(self.limit_values)):
            raise ValueError("limit_freq_hz and limit_values must have the same length")
        return self


class NotchRow(BaseModel):
    f_lo_hz: float
    f_hi_hz: float
    f_deepest_hz: float
    depth_db: float
    width_oct: float
    exceeds_policy: bool


class NotchingRead(BaseModel):
    """The newest response-limit notching of a level."""

    id: int
    level_id: int
    level: str
    level_hash: str
    kind: Literal["random", "sine"]
    location: str
    value_unit: str
    limit: str
    transmissibility_source: str
    transmissibility_note: str
    max_notch_db: float | None
    method: str = METHOD
    freq_hz: list[float]
    original: list[float]
    notched: list[float]
    notches: list[NotchRow]
    #: Random: overall before and after notching [g rms]; sine: None.
    grms_before: float | None = None
    grms_after: float | None = None
    needs_acceptance: bool
    accepted_by: str | None = None
    acceptance_rationale: str = ""
    author: str
    created_at: datetime
    stale: bool = False


def _limit_of(cmd: NotchingIn):
    if cmd.limit is not None:
        return cmd.limit
    return (cmd.limit_freq_hz, cmd.limit_values)


def _limit_text(cmd: NotchingIn, unit: str) -> str:
    if cmd.limit is not None:
        return f"{cmd.limit:.4g} {unit} at every frequency"
    pts = ", ".join(f"{v:.4g} {unit} at {f:.4g} Hz"
                    for f, v in zip(cmd.limit_freq_hz, cmd.limit_values, strict=True))
    return f"table: {pts} (log-log between)"


def notch_level_profile(kind: K, freq_hz, values, cmd: NotchingIn) -> core_tr.NotchedProfile:
    """The notched input of a random [Hz, g^2/Hz] or sine [Hz, g peak] profile."""
    with envdata.core_errors(""):
        table = core_tr.GainTable(np.asarray(cmd.transmissibility_freq_hz, dtype=float),
                                  np.asarray(cmd.transmissibility_gain, dtype=float))
        table.covers(float(freq_hz[0]), float(freq_hz[-1]), "transmissibility_freq_hz")
        if kind is K.random:
            return core_tr.notch_random(freq_hz, values, _limit_of(cmd), table,
                                        max_notch_db=cmd.max_notch_db)
        spec = core_sine.SineTable(np.asarray(freq_hz, dtype=float),
                                   np.asarray(values, dtype=float))
        return core_tr.notch_sine(spec, _limit_of(cmd), table, max_notch_db=cmd.max_notch_db)


def _latest_row(session: Session, level_id: int) -> m.LevelNotching | None:
    return session.scalar(select(m.LevelNotching).where(m.LevelNotching.level_id == level_id)
                          .order_by(m.LevelNotching.id.desc()).limit(1))


def set_notching(session: Session, actor: Actor, level_id: int, cmd: NotchingIn
                 ) -> m.LevelNotching:
    """Notch a random or sine test level against a response limit (a new row; the newest
    applies). Nothing is stored when an input is refused."""
    level = get(session, m.Level, level_id, "level")
    require_for(session, actor, level, m.Role.engineer, "notching a level")
    if level.kind not in (K.random, K.sine) or level.purpose is not m.LevelPurpose.test:
        raise ValidationFailed("level_id", level_id, f"level {level.name!r} is a "
                               f"{level.kind.value} {level.purpose.value} level; response-limit "
                               "notching goes with random and sine test levels")
    res = result_of(level)
    values = res.asd_g2_hz if level.kind is K.random else res.accel_g
    unit = "g^2/Hz" if level.kind is K.random else "g peak"
    if cmd.max_notch_db is None and level.policy is not None:  # the policy's limit
        cmd = cmd.model_copy(update={
            "max_notch_db": rules_of(level.policy).control.max_notch_db})
    prof = notch_level_profile(level.kind, res.freq_hz, values, cmd)
    result = {
        "value_unit": unit,
        "limit": _limit_text(cmd, unit),
        "freq_hz": prof.freq_hz.tolist(),
        "original": prof.original.tolist(),
        "notched": prof.values.tolist(),
        "notches": [n.__dict__ for n in prof.notches],
        "needs_acceptance": prof.needs_acceptance,
        "accepted_by": None,
        "acceptance_rationale": "",
    }
    if level.kind is K.random:
        result["grms_before"] = float(core_psd.grms(res.freq_hz, values))
        result["grms_after"] = float(core_psd.grms(prof.freq_hz, prof.values))
    row = m.LevelNotching(level_id=level.id, params=cmd.model_dump(mode="json"), result=result,
                          level_hash=level.level_hash, author=actor.name)
    session.add(row)
    session.flush()
    record(session, actor, "notch", "level", level.id, notching_id=row.id,
           location=cmd.location, notches=len(prof.notches),
           deepest_db=round(prof.deepest_db, 3), needs_acceptance=prof.needs_acceptance)
    return row


def read_notching(session: Session, row: m.LevelNotching) -> NotchingRead:
    level = get(session, m.Level, row.level_id, "level")
    p, r = row.params, row.result
    return NotchingRead(
        id=row.id, level_id=level.id, level=f"{level.name} #{level.number}",
        level_hash=row.level_hash, kind=level.kind.value, location=p["location"],
        value_unit=r["value_unit"], limit=r["limit"],
        transmissibility_source=p["transmissibility_source"],
        transmissibility_note=p.get("transmissibility_note", ""),
        max_notch_db=p.get("max_notch_db"), freq_hz=r["freq_hz"], original=r["original"],
        notched=r["notched"], notches=[NotchRow(**n) for n in r["notches"]],
        grms_before=r.get("grms_before"), grms_after=r.get("grms_after"),
        needs_acceptance=r["needs_acceptance"], accepted_by=r.get("accepted_by"),
        acceptance_rationale=r.get("acceptance_rationale", ""), author=row.author,
        created_at=row.created_at, stale=row.level_hash != level.level_hash)


def level_notching(session: Session, level_id: int) -> NotchingRead | None:
    """The newest response-limit notching of a level, or None."""
    row = _latest_row(session, level_id)
    return None if row is None else read_notching(session, row)


def accept_notching(session: Session, actor: Actor, level_id: int, rationale: str
                    ) -> m.LevelNotching:
    """An approver accepts the notches deeper than allowed: the level's next row and an
    event (who, when, why)."""
    level = get(session, m.Level, level_id, "level")
    require_for(session, actor, level, m.Role.approver, "accepting notches deeper than allowed")
    if not rationale.strip():
        raise ValidationFailed("rationale", rationale, "must say why the notches are accepted")
    row = _latest_row(session, level_id)
    if row is None:
        raise ValidationFailed("level_id", level_id, "the level has no response-limit notching")
    if not row.result.get("needs_acceptance"):
        raise Conflict("no notch of this level is deeper than allowed")
    if row.result.get("accepted_by"):
        raise Conflict(f"the notches were accepted already by {row.result['accepted_by']}")
    new = m.LevelNotching(level_id=level_id, params=row.params,
                          result={**row.result, "accepted_by": actor.name,
                                  "acceptance_rationale": rationale},
                          level_hash=row.level_hash, author=actor.name)
    session.add(new)
    session.flush()
    record(session, actor, "accept_notching", "level", level_id, notching_id=new.id,
           rationale=rationale,
           depths_db=[n["depth_db"] for n in row.result["notches"] if n["exceeds_policy"]])
    return new


def notch_table_rows(read: NotchingRead, per_notch: int = 16) -> list[tuple[float, float, float]]:
    """The notched input where it differs from the level, thinned to at most `per_notch`
    points per notch plus each notch's edges and deepest point (for a printed table; the
    CSV carries every point): (frequency [Hz], level, notched)."""
    f = np.asarray(read.freq_hz)
    keep: set[int] = set()
    for n in read.notches:
        idx = np.flatnonzero((f >= n.f_lo_hz * (1 - 1e-12)) & (f <= n.f_hi_hz * (1 + 1e-12)))
        if idx.size == 0:
            continue
        step = max(1, math.ceil(idx.size / per_notch))
        keep.update(idx[::step].tolist())
        keep.update([int(idx[0]), int(idx[-1]), int(np.argmin(np.abs(f - n.f_deepest_hz)))])
    return [(read.freq_hz[i], read.original[i], read.notched[i]) for i in sorted(keep)]


__all__ = ["NotchingIn", "NotchingRead", "accept_notching", "level_notching",
           "notch_level_profile", "notch_table_rows", "read_notching", "set_notching"]
