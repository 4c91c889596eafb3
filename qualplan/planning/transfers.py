"""Environments carried down the product tree: mountings, transfer rules, derivations.

A unit states its orientation in its parent (a mounting: signed axis permutation or
direction cosines). Transfer rules (zone transmissibility, mass attenuation) are
revisioned items with their basis and provenance. A *transferred* environment of
the unit is an ordinary environment whose revisions were derived from the
parent's environments through the mounting and the rules; each such revision
stores its recipe and the content hashes of its inputs
(:class:`~qualplan.store.models.EnvironmentDerivation`), so a new revision of a
parent environment, of a rule, a changed mounting or a changed unit mass makes
it (and the levels made from it) stale. The numbers come from
:mod:`qualplan.dynamics.transfer`.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, Field
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from qualplan.dynamics import transfer as core_tr
from qualplan.planning import envdata
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require_for, require_in
from qualplan.planning.catalog import _add_unique, get
from qualplan.planning.environments import _append_revision
from qualplan.planning.errors import Conflict, ValidationFailed
from qualplan.planning.policies import rules_of
from qualplan.planning.withdrawals import (
    describe,
    environment_withdrawal,
    replaced_environment_ids,
)
from qualplan.store import models as m
from qualplan.store.hashing import json_hash, revision_hash
from qualplan.store.repositories import RevisionRepository
from qualplan.store.types import utcnow

K = m.EnvironmentKind
RuleKind = Literal["zone_transmissibility", "mass_attenuation"]
Basis = Literal["test", "analysis", "handbook"]
IDENTITY = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]]


# --- commands and read models -----------------------------------------------------------


class MountingIn(s.Command):
    """Orientation of a product in its parent: ``axes`` (signed permutation, e.g.
    {"X": "-Z", "Y": "X", "Z": "-Y"}) or ``matrix`` (3 x 3 direction cosines, rows the
    product's X, Y, Z on the parent's X, Y, Z)."""

    axes: dict[str, str] | None = None
    matrix: list[list[float]] | None = None
    note: str = ""
    expected_version: int | None = None


class MountingRead(s.Read):
    product_id: int
    frame: dict[str, Any]
    note: str
    author: str
    updated_at: datetime
    version: int


class RuleCreate(s.Command):
    """A transfer rule and its first revision.

    ``spec`` of a zone transmissibility: {"freq_hz": [...], "gain": [...]} (|T| [g/g]);
    of a mass attenuation: {"method": "gevs"} or {"method": "mass_loading",
    "mounting_mass_kg": M_s, "max_reduction_db": 6}.
    """

    program_id: int
    name: str = Field(min_length=1, max_length=200)
    kind: RuleKind
    spec: dict[str, Any]
    basis: Basis
    provenance: str = ""
    note: str = "first revision"


class RuleRevisionIn(s.Command):
    spec: dict[str, Any]
    basis: Basis
    provenance: str = ""
    note: str = Field(min_length=1)


class RuleRead(BaseModel):
    id: int
    program_id: int
    name: str
    kind: str
    revision: int
    revision_id: int
    basis: str
    provenance: str
    spec: dict[str, Any]
    content_hash: str


class TransferCreate(s.Command):
    """Derive (or re-derive) a transferred environment of a product from its parent's."""

    product_id: int
    name: str = Field(min_length=1, max_length=200)
    parent_environment_ids: list[int] = Field(min_length=1)
    axis: m.Axis
    rule_ids: list[int] = []
    phase_id: int | None = None
    note: str = ""


class EnvironmentOrigin(s.EnvironmentRead):
    """An environment that applies to a product, and where it came from."""

    origin: Literal["own", "inherited", "transferred", "replaced"]
    from_product: str
    through: list[str] = []
    inputs: list[str] = []
    stale: bool = False
    stale_reasons: list[str] = []
    notes: list[str] = []


# --- mountings --------------------------------------------------------------------------


def _frame_json(cmd: MountingIn) -> dict[str, Any]:
    if (cmd.axes is None) == (cmd.matrix is None):
        raise ValidationFailed("axes", cmd.axes, "give either axes (a signed permutation) or "
                               "matrix (direction cosines), not both")
    with envdata.core_errors(""):
        frame = core_tr.axis_frame(cmd.axes if cmd.axes is not None else cmd.matrix)
    axes = frame.describe() if frame.is_permutation() else None
    return {"matrix": frame.matrix.tolist(), "axes": axes}


def set_mounting(session: Session, actor: Actor, product_id: int, cmd: MountingIn
                 ) -> m.Mounting:
    """State (or change) a product's orientation in its parent."""
    product = get(session, m.Product, product_id, "product")
    require_for(session, actor, product, m.Role.engineer, "setting a mounting")
    if product.parent_id is None:
        raise ValidationFailed("product_id", product_id,
                               f"product {product.name!r} has no parent to be mounted in")
    frame = _frame_json(cmd)
    row = session.scalar(select(m.Mounting).where(m.Mounting.product_id == product.id))
    if row is None:
        row = m.Mounting(product_id=product.id, frame=frame, note=cmd.note, author=actor.name)
        session.add(row)
    else:
        if cmd.expected_version is not None and row.version != cmd.expected_version:
            from qualplan.planning.errors import VersionMismatch

            raise VersionMismatch("mounting", row.id, cmd.expected_version, row.version)
        row.frame, row.note, row.author = frame, cmd.note, actor.name
        row.updated_at = utcnow()
    session.flush()
    record(session, actor, "mount", "product", product.id, frame=frame)
    return row


def mounting_of(session: Session, product: m.Product) -> m.Mounting | None:
    return session.scalar(select(m.Mounting).where(m.Mounting.product_id == product.id))


def read_mounting(session: Session, product_id: int) -> MountingRead | None:
    """The product's stated orientation in its parent, or None (aligned with the parent)."""
    row = mounting_of(session, get(session, m.Product, product_id, "product"))
    return None if row is None else MountingRead.model_validate(row)


def _matrix(session: Session, product: m.Product) -> list[list[float]]:
    row = mounting_of(session, product)
    return row.frame["matrix"] if row is not None else IDENTITY


def _composed(session: Session, product: m.Product, ancestor_id: int) -> list[list[float]]:
    """Direction cosines of the product's axes in an ancestor's axes: the mountings of
    each level between them multiplied (child in parent @ parent in grandparent ...)."""
    r, p = np.eye(3), product
    while p.id != ancestor_id:
        if p.parent_id is None:
            raise ValidationFailed("product_id", ancestor_id, "is not an ancestor")
        r = r @ np.asarray(_matrix(session, p))
        p = session.get(m.Product, p.parent_id)
    if p is product:
        return IDENTITY
    return [[float(x) for x in row] for row in r]


# --- rules ------------------------------------------------------------------------------


def _check_rule_spec(kind: str, spec: dict[str, Any]) -> dict[str, Any]:
    if not isinstance(spec, dict):
        raise ValidationFailed("spec", spec, "must be an object")
    if kind == "zone_transmissibility":
        envdata._known_keys(spec, {"freq_hz", "gain"})
        f, g = envdata._floats(spec, "freq_hz"), envdata._floats(spec, "gain")
        with envdata.core_errors("spec."):
            core_tr.GainTable(f, g)
        return {"freq_hz": f, "gain": g}
    method = spec.get("method")
    if method == "gevs":
        envdata._known_keys(spec, {"method"})
        return {"method": "gevs"}
    if method == "mass_loading":
        envdata._known_keys(spec, {"method", "mounting_mass_kg", "max_reduction_db"})
        ms = envdata._optional_positive(spec, "mounting_mass_kg")
        if ms is None:
            raise ValidationFailed("spec.mounting_mass_kg", None,
                                   "is required (effective mass of the mounting structure [kg])")
        out = {"method": "mass_loading", "mounting_mass_kg": ms}
        if (cap := envdata._optional_positive(spec, "max_reduction_db")) is not None:
            out["max_reduction_db"] = cap
        return out
    raise ValidationFailed("spec.method", method, "must be 'gevs' or 'mass_loading'")


def _rule_revision_hash(spec: dict[str, Any], basis: str, provenance: str) -> str:
    return json_hash({"spec": spec, "basis": basis, "provenance": provenance})


def _latest_rule_revision(session: Session, rule_id: int) -> m.TransferRuleRevision | None:
    return session.scalar(
        select(m.TransferRuleRevision)
        .where(m.TransferRuleRevision.rule_id == rule_id)
        .order_by(m.TransferRuleRevision.number.desc())
        .limit(1)
    )


def _append_rule_revision(session, actor, rule, spec, basis, provenance, note):
    number = 1 + int(session.scalar(select(func.max(m.TransferRuleRevision.number)).where(
        m.TransferRuleRevision.rule_id == rule.id)) or 0)
    rev = m.TransferRuleRevision(rule_id=rule.id, number=number, spec=spec, basis=basis,
                                 provenance=provenance,
                                 content_hash=_rule_revision_hash(spec, basis, provenance),
                                 author=actor.name, note=note)
    session.add(rev)
    session.flush()
    record(session, actor, "revise", "transfer_rule", rule.id, revision=number,
           content_hash=rev.content_hash, note=note)
    return rev


def create_rule(session: Session, actor: Actor, cmd: RuleCreate) -> m.TransferRule:
    """Create a transfer rule with its first revision."""
    get(session, m.Program, cmd.program_id, "program")
    require_in(session, actor, cmd.program_id, m.Role.engineer, "creating a transfer rule")
    spec = _check_rule_spec(cmd.kind, cmd.spec)
    rule = _add_unique(session, m.TransferRule(program_id=cmd.program_id, name=cmd.name,
                                               kind=cmd.kind), f"transfer rule {cmd.name!r}")
    record(session, actor, "create", "transfer_rule", rule.id, name=cmd.name, kind=cmd.kind)
    _append_rule_revision(session, actor, rule, spec, cmd.basis, cmd.provenance, cmd.note)
    return rule


def revise_rule(session: Session, actor: Actor, rule_id: int, cmd: RuleRevisionIn
                ) -> m.TransferRuleRevision:
    """Add a revision to a rule (identical content is refused)."""
    rule = get(session, m.TransferRule, rule_id, "transfer rule")
    require_for(session, actor, rule, m.Role.engineer, "revising a transfer rule")
    spec = _check_rule_spec(rule.kind, cmd.spec)
    latest = _latest_rule_revision(session, rule.id)
    if latest is not None and latest.content_hash == _rule_revision_hash(
            spec, cmd.basis, cmd.provenance):
        raise Conflict(f"the rule is identical to revision {latest.number}; nothing to revise")
    return _append_rule_revision(session, actor, rule, spec, cmd.basis, cmd.provenance, cmd.note)


def read_rule(session: Session, rule: m.TransferRule) -> RuleRead:
    rev = _latest_rule_revision(session, rule.id)
    return RuleRead(id=rule.id, program_id=rule.program_id, name=rule.name, kind=rule.kind,
                    revision=rev.number, revision_id=rev.id, basis=rev.basis,
                    provenance=rev.provenance, spec=rev.spec, content_hash=rev.content_hash)


def rule_by_id(session: Session, rule_id: int) -> RuleRead:
    """A transfer rule at its latest revision (NotFound naming the id)."""
    return read_rule(session, get(session, m.TransferRule, rule_id, "transfer rule"))


def list_rules(session: Session, program_id: int) -> list[RuleRead]:
    rows = session.scalars(select(m.TransferRule).where(m.TransferRule.program_id == program_id)
                           .order_by(m.TransferRule.id))
    return [read_rule(session, r) for r in rows]


# --- derivation -------------------------------------------------------------------------


def _parent_profiles(kind: K, inputs: list[tuple[m.Environment, m.EnvironmentRevision]]):
    """Parent axis -> profile (an "all" input applies to each of X, Y, Z)."""
    out = {}
    for env, rev in inputs:
        if kind is K.random:
            prof = (rev.spec["freq_hz"], rev.spec["asd_g2_hz"])
        elif kind is K.shock:
            prof = (rev.spec["freq_hz"], rev.spec["accel_g"])
        else:
            prof = rev
        for ax in (core_tr.AXES if env.axis is m.Axis.all else (env.axis.value,)):
            out[ax] = prof
    return out


def _map_axes(kind: K, frame: core_tr.AxisFrame, parents: dict, child_axes: tuple[str, ...],
              field: str) -> dict[str, Any]:
    """Profiles (random, shock) or sine specs on each requested child axis."""
    if kind is K.random:
        mapped = core_tr.map_random(frame, parents)
    elif kind is K.shock:
        mapped = core_tr.map_peak(frame, parents)
    else:
        mapped = {}
        for ax in child_axes:
            w = frame.weights(ax)
            terms = [(abs(w[core_tr.AXES.index(p)]), rev) for p, rev in parents.items()
                     if abs(w[core_tr.AXES.index(p)]) > 1e-9]
            if not terms:
                continue
            first = terms[0][1]
            if any(rev.content_hash != first.content_hash for _, rev in terms):
                raise ValidationFailed(
                    field, [rev.id for _, rev in terms],
                    f"child axis {ax} sees sine environments of several parent axes with "
                    "different bands; the band form keeps one law per band, so give one "
                    "parent axis (or identical ones)")
            factor = max(wt for wt, _ in terms)
            mapped[ax] = (core_tr.scale_sine_bands(envdata.sine_spec_of(first.spec), factor),
                          first.spec["sweep"])
    missing = [ax for ax in child_axes if ax not in mapped]
    if missing:
        raise ValidationFailed(field, missing, "no parent environment reaches child axis "
                               f"{missing[0]} through the mounting")
    return {ax: mapped[ax] for ax in child_axes}


def _same(kind: K, a, b) -> bool:
    if kind is K.sine:
        return envdata.sine_spec_of(_sine_json(*a)) == envdata.sine_spec_of(_sine_json(*b))
    return (len(a[0]) == len(b[0]) and np.allclose(a[0], b[0], rtol=1e-12)
            and np.allclose(a[1], b[1], rtol=1e-9))


def _sine_json(spec, sweep) -> dict[str, Any]:
    bands = [{"f_lo_hz": b.f_lo_hz, "f_hi_hz": b.f_hi_hz, "quantity": b.quantity,
              "amplitude": b.amplitude} | ({"measure": "peak"} if b.quantity == "displacement"
                                           else {}) for b in spec.bands]
    return {"bands": bands, "sweep": sweep}


def _apply_rule(kind: K, value, rule: m.TransferRule, rev: m.TransferRuleRevision,
                product: m.Product, notes: list[str]):
    if rule.kind == "zone_transmissibility":
        table = core_tr.GainTable(rev.spec["freq_hz"], rev.spec["gain"])
        if kind is K.random:
            notes.append(f"{rule.name} r{rev.number}: ASD x |T|^2 ({rev.basis})")
            return core_tr.apply_gain_asd(*value, table)
        if kind is K.shock:
            notes.append(f"{rule.name} r{rev.number}: SRS x |T| at each natural frequency "
                         f"(common practice, not exact where |T| varies within fn/Q; "
                         f"{rev.basis})")
            return core_tr.apply_gain_peak(*value, table)
        notes.append(f"{rule.name} r{rev.number}: sine x |T|, bands split at the table "
                     f"points and scaled by the largest |T| on each (conservative; {rev.basis})")
        spec, sweep = value
        return core_tr.apply_gain_sine_bands(spec, table), sweep
    if kind is not K.random:
        raise ValidationFailed("rule_ids", rule.id, f"mass attenuation {rule.name!r} applies to "
                               f"random environments only, not {kind.value}")
    if product.mass_kg is None:
        raise ValidationFailed("mass_kg", None, f"product {product.name!r} has no mass; mass "
                               "attenuation needs it")
    if rev.spec["method"] == "gevs":
        att = core_tr.gevs_mass_reduction_db(product.mass_kg)
    else:
        att = core_tr.mass_loading_reduction_db(
            product.mass_kg, rev.spec["mounting_mass_kg"],
            max_reduction_db=rev.spec.get("max_reduction_db", 6.0))
    notes.append(f"{rule.name} r{rev.number}: -{att.reduction_db:.2f} dB for "
                 f"{product.mass_kg:g} kg; " + "; ".join(att.notes))
    return att.apply(*value)


def _content(kind: K, value, inputs) -> dict[str, Any]:
    if kind is K.random:
        data = {"freq_hz": [float(x) for x in value[0]],
                "asd_g2_hz": [float(x) for x in value[1]]}
        durations = {rev.spec.get("duration_s") for _, rev in inputs}
        if len(durations) == 1 and None not in durations:
            data["duration_s"] = durations.pop()
        elif len(durations - {None}) > 0:
            data["duration_s"] = max(durations - {None})
        return data
    if kind is K.shock:
        data = {"freq_hz": [float(x) for x in value[0]], "accel_g": [float(x) for x in value[1]],
                "q": inputs[0][1].spec.get("q", 10.0)}
        counts = [rev.spec["count"] for _, rev in inputs if "count" in rev.spec]
        if counts:
            data["count"] = max(counts)
        return data
    return _sine_json(*value)


def derive_transferred(session: Session, actor: Actor, cmd: TransferCreate
                       ) -> m.EnvironmentRevision:
    """Derive a transferred environment of a product from its parent's environments.

    The parent's environments are mapped to the product's axes through its mounting
    (no mounting: aligned with the parent), then the rules are applied in the order
    given. The result is a new environment (first derivation) or its next revision.
    """
    product = get(session, m.Product, cmd.product_id, "product")
    require_for(session, actor, product, m.Role.engineer, "deriving a transferred environment")
    if product.parent_id is None:
        raise ValidationFailed("product_id", cmd.product_id,
                               f"product {product.name!r} has no parent to take environments from")
    revs = RevisionRepository(session)
    inputs: list[tuple[m.Environment, m.EnvironmentRevision]] = []
    seen_axes: set[str] = set()
    for i, eid in enumerate(cmd.parent_environment_ids):
        field = f"parent_environment_ids[{i}]"
        env = get(session, m.Environment, eid, "environment")
        ancestors = {a.id for a in _ancestors(session, product)}
        if env.product_id not in ancestors:
            raise ValidationFailed(field, eid, f"environment {env.name!r} is not one of a "
                                   f"parent's of {product.name!r}")
        if inputs and env.product_id != inputs[0][0].product_id:
            raise ValidationFailed(field, eid, "all inputs must come from the same parent "
                                   f"(the first is of product {inputs[0][0].product_id})")
        if (w := environment_withdrawal(session, env.id)) is not None:
            raise ValidationFailed(field, eid, f"environment {env.name!r} is {describe(w)}")
        if env.kind is K.time_history:
            raise ValidationFailed(field, eid, "a time history is not transferred; derive "
                                   "from its PSD or SRS environment")
        if inputs and env.kind is not inputs[0][0].kind:
            raise ValidationFailed(field, eid, f"is {env.kind.value}, the first input is "
                                   f"{inputs[0][0].kind.value}")
        axes = set(core_tr.AXES) if env.axis is m.Axis.all else {env.axis.value}
        if axes & seen_axes:
            raise ValidationFailed(field, eid, f"a second input on parent axis "
                                   f"{sorted(axes & seen_axes)[0]}")
        seen_axes |= axes
        inputs.append((env, revs.latest(env.id)))
    kind = inputs[0][0].kind
    if kind is K.shock and len({rev.spec.get("q", 10.0) for _, rev in inputs}) > 1:
        raise ValidationFailed("parent_environment_ids", cmd.parent_environment_ids,
                               "SRS inputs must refer to the same Q")
    rules = []
    for i, rid in enumerate(cmd.rule_ids):
        rule = get(session, m.TransferRule, rid, "transfer rule")
        if rule.program_id != product.program_id:
            raise ValidationFailed(f"rule_ids[{i}]", rid, "the rule belongs to another program")
        rules.append((rule, _latest_rule_revision(session, rule.id)))
    source = session.get(m.Product, inputs[0][0].product_id)
    matrix = _composed(session, product, source.id)
    frame = core_tr.AxisFrame(np.asarray(matrix))
    child_axes = core_tr.AXES if cmd.axis is m.Axis.all else (cmd.axis.value,)
    notes = [("mounting " + (", ".join(f"{k} = parent {v}" for k, v in
                                        frame.describe().items()) if frame.is_permutation()
                             else f"direction cosines {np.round(frame.matrix, 4).tolist()}"))]
    if kind is K.random and not frame.is_permutation():
        notes.append("rotated mounting: ASD = sum of direction cosine^2 x parent ASDs, parent "
                     "axes assumed uncorrelated")
    elif kind is not K.random and not frame.is_permutation():
        notes.append("rotated mounting: envelope of the direction-cosine-weighted parent axes "
                     "(separate events, one axis at a time)")
    for i, (env, _) in enumerate(inputs):
        cols = [core_tr.AXES.index(a) for a in
                (core_tr.AXES if env.axis is m.Axis.all else (env.axis.value,))]
        rows = [core_tr.AXES.index(a) for a in child_axes]
        if np.max(np.abs(frame.matrix[np.ix_(rows, cols)])) < 1e-9:
            raise ValidationFailed(f"parent_environment_ids[{i}]", env.id,
                                   f"environment {env.name!r} (parent axis {env.axis.value}) "
                                   f"does not reach axis {cmd.axis.value} through the mounting")
    with envdata.core_errors(""):
        mapped = _map_axes(kind, frame, _parent_profiles(kind, inputs), child_axes,
                           "parent_environment_ids")
        if cmd.axis is m.Axis.all:
            first = mapped[child_axes[0]]
            if not all(_same(kind, first, mapped[ax]) for ax in child_axes[1:]):
                raise ValidationFailed("axis", "all", "the mounting gives different inputs on "
                                       "the product's axes; derive one environment per axis")
        value = mapped[child_axes[0]]
        for rule, rev in rules:
            value = _apply_rule(kind, value, rule, rev, product, notes)
    data = _content(kind, value, inputs)
    spec, array = envdata.normalise(kind, data)
    hashes = {
        "revisions": {str(rev.id): rev.content_hash for _, rev in inputs},
        "rules": {str(rev.id): rev.content_hash for _, rev in rules},
        "mounting": json_hash(matrix),
    }
    if any(rule.kind == "mass_attenuation" for rule, _ in rules):
        hashes["unit_mass_kg"] = product.mass_kg
    recipe = {
        "kind": kind.value,
        "from_product_id": source.id,
        "parent_environment_ids": list(cmd.parent_environment_ids),
        "axis": cmd.axis.value,
        "rule_ids": list(cmd.rule_ids),
        "matrix": matrix,
        "notes": notes,
    }
    env = session.scalar(select(m.Environment).where(m.Environment.product_id == product.id,
                                                     m.Environment.name == cmd.name))
    parent_names = ", ".join(f"{e.name} r{r.number}" for e, r in inputs)
    provenance = (f"transferred from {parent_names}"
                  + (" through " + ", ".join(r.name for r, _ in rules) if rules else ""))
    if env is None:
        phase_id = cmd.phase_id
        if phase_id is None and len({e.phase_id for e, _ in inputs}) == 1:
            phase_id = inputs[0][0].phase_id
        env = _add_unique(session, m.Environment(
            product_id=product.id, phase_id=phase_id, name=cmd.name, kind=kind, axis=cmd.axis,
            units=envdata.UNITS[kind], source="transferred", provenance=provenance),
            f"environment {cmd.name!r} of product {product.name!r}")
        record(session, actor, "create", "environment", env.id, name=cmd.name, kind=kind.value,
               axis=cmd.axis.value, transferred=True)
    else:
        if derivation_of(session, revs.latest(env.id)) is None:
            raise Conflict(f"environment {cmd.name!r} of {product.name!r} is the product's own, "
                           "not a transferred one; choose another name")
        if env.kind is not kind or env.axis is not cmd.axis:
            raise ValidationFailed("axis", cmd.axis.value, f"environment {cmd.name!r} is "
                                   f"{env.kind.value} on {env.axis.value}")
        latest = revs.latest(env.id)
        old = derivation_of(session, latest)
        if (latest.content_hash == revision_hash(spec, array) and old.input_hashes == hashes
                and old.recipe == recipe):
            raise Conflict(f"nothing changed since revision {latest.number} of {cmd.name!r}")
    rev = _append_revision(session, actor, env, spec, array,
                           cmd.note or "derived: " + "; ".join(notes))
    session.add(m.EnvironmentDerivation(revision_id=rev.id, product_id=product.id,
                                        recipe=recipe, input_hashes=hashes))
    session.flush()
    return rev


def derivation_of(session: Session, rev: m.EnvironmentRevision | None
                  ) -> m.EnvironmentDerivation | None:
    if rev is None:
        return None
    return session.scalar(select(m.EnvironmentDerivation)
                          .where(m.EnvironmentDerivation.revision_id == rev.id))


def derivation_staleness(session: Session, rev: m.EnvironmentRevision, _depth: int = 0
                         ) -> list[str]:
    """Why a transferred revision no longer reflects its inputs (empty when current or
    when the revision was not transferred). Follows transferred inputs up the tree."""
    d = derivation_of(session, rev)
    if d is None or _depth > 20:
        return []
    reasons = []
    revs = RevisionRepository(session)
    for rid in d.input_hashes.get("revisions", {}):
        used = revs.get(int(rid))
        latest = revs.latest(used.environment_id)
        if latest.number != used.number:
            reasons.append(f"parent environment {used.environment.name!r} has revision "
                           f"{latest.number}, the transfer used revision {used.number}")
        else:
            reasons += [f"{used.environment.name!r}: {r}"
                        for r in derivation_staleness(session, used, _depth + 1)]
    for rid in d.input_hashes.get("rules", {}):
        used = session.get(m.TransferRuleRevision, int(rid))
        latest = _latest_rule_revision(session, used.rule_id)
        if latest.number != used.number:
            reasons.append(f"transfer rule {used.rule.name!r} has revision {latest.number}, "
                           f"the transfer used revision {used.number}")
    product = session.get(m.Product, d.product_id)
    source_id = d.recipe.get("from_product_id", product.parent_id)
    if json_hash(_composed(session, product, source_id)) != d.input_hashes.get("mounting"):
        reasons.append(f"the mounting of {product.name!r} changed since the transfer")
    if "unit_mass_kg" in d.input_hashes and d.input_hashes["unit_mass_kg"] != product.mass_kg:
        reasons.append(f"the mass of {product.name!r} changed since the transfer "
                       f"({d.input_hashes['unit_mass_kg']} kg -> {product.mass_kg} kg)")
    return reasons


# --- what applies to a product ---------------------------------------------------------


def _ancestors(session: Session, product: m.Product) -> list[m.Product]:
    out, p = [], product
    while p.parent_id is not None:
        p = session.get(m.Product, p.parent_id)
        out.append(p)
    return out


def environments_for(session: Session, product_id: int) -> list[EnvironmentOrigin]:
    """Every environment that applies to a product: its own, its transferred ones, its
    parents' (inherited unchanged), and the parents' ones a transfer replaced."""
    product = get(session, m.Product, product_id, "product")
    revs = RevisionRepository(session)
    replaced = replaced_environment_ids(session, product)
    # direction cosines of the product's axes in each ancestor's axes (frames composed)
    frames, r, p = {}, np.eye(3), product
    for owner in _ancestors(session, product):
        r = r @ np.asarray(_matrix(session, p))
        frames[owner.id] = r
        p = owner
    out = []
    for owner in [product, *_ancestors(session, product)]:
        envs = session.scalars(select(m.Environment).where(m.Environment.product_id == owner.id)
                               .order_by(m.Environment.id))
        for env in envs:
            latest = revs.latest(env.id)
            base = s.EnvironmentRead.model_validate(env).model_dump()
            base["latest_revision"] = latest.number if latest else None
            d = derivation_of(session, latest)
            if owner.id == product.id:
                if d is None:
                    out.append(EnvironmentOrigin(**base, origin="own", from_product=owner.name))
                    continue
                reasons = derivation_staleness(session, latest)
                rule_names = []
                for rid in d.input_hashes.get("rules", {}):
                    rr = session.get(m.TransferRuleRevision, int(rid))
                    rule_names.append(f"{rr.rule.name} r{rr.number} ({rr.basis})")
                inputs = []
                for rid in d.input_hashes.get("revisions", {}):
                    ir = revs.get(int(rid))
                    inputs.append(f"{ir.environment.name} r{ir.number}")
                parent = session.get(m.Product, d.recipe.get("from_product_id",
                                                             product.parent_id))
                out.append(EnvironmentOrigin(
                    **base, origin="transferred", from_product=parent.name if parent else "",
                    through=["mounting"] + rule_names, inputs=inputs, stale=bool(reasons),
                    stale_reasons=reasons))
            else:
                origin = "replaced" if env.id in replaced else "inherited"
                notes = []
                if origin == "inherited" and env.axis is not m.Axis.all:
                    i = core_tr.AXES.index(env.axis.value)
                    if abs(frames[owner.id][i, i] - 1.0) > 1e-9:
                        notes.append(f"on the axes of {owner.name!r}, where the {env.axis.value} "
                                     f"axis of {product.name!r} does not lie: transfer it "
                                     "through the mounting")
                out.append(EnvironmentOrigin(**base, origin=origin, from_product=owner.name,
                                             notes=notes))
    return out


# --- force limits ------------------------------------------------------------------------


class ModeIn(s.Command):
    fn_hz: float = Field(gt=0)
    mass_kg: float = Field(gt=0)
    q: float = Field(gt=0.5)


class ForceLimitIn(s.Command):
    """NASA-HDBK-7004 semi-empirical force limit inputs, and the item's modes (effective
    masses from the modal summary) to predict the notches."""

    mass_kg: float = Field(gt=0)
    c2: float = Field(gt=0)
    f0_hz: float = Field(gt=0)
    rolloff: float = Field(default=2.0, gt=0)
    modes: list[ModeIn] = []
    residual_mass_kg: float = Field(default=0.0, ge=0)
    max_notch_db: float | None = Field(default=None, gt=0)


class NotchRead(BaseModel):
    f_lo_hz: float
    f_hi_hz: float
    f_deepest_hz: float
    depth_db: float
    width_oct: float
    exceeds_policy: bool


class ForceLimitRead(BaseModel):
    """A force spectral density limit [N^2/Hz] and the notches it predicts in the input."""

    environment: str
    c2: float
    mass_kg: float
    f0_hz: float
    rolloff: float
    rolloff_db_per_oct: float
    freq_hz: list[float]
    fsd_n2_hz: list[float]
    force_rms_n: float
    notches: list[NotchRead] = []
    notched_freq_hz: list[float] = []
    notched_asd_g2_hz: list[float] = []
    needs_acceptance: bool = False
    #: Who accepted the notches deeper than the policy allows, and why (None: not accepted).
    accepted_by: str | None = None
    acceptance_rationale: str = ""
    method: str = ("NASA-HDBK-7004C semi-empirical method: S_FF = C^2 M0^2 S_AA below f0, "
                   "x (f0/f)^n above")


def force_limit_of(freq_hz, asd_g2_hz, label: str, cmd: ForceLimitIn) -> ForceLimitRead:
    """Force limit of an input ASD [Hz, g^2/Hz], and its predicted notches when modes are
    given (computed by qualplan.dynamics.transfer)."""
    with envdata.core_errors(""):
        fl = core_tr.semi_empirical_force_limit(freq_hz, asd_g2_hz, mass_kg=cmd.mass_kg,
                                                c2=cmd.c2, f0_hz=cmd.f0_hz, rolloff=cmd.rolloff)
        out = ForceLimitRead(environment=label, c2=fl.c2, mass_kg=fl.mass_kg, f0_hz=fl.f0_hz,
                             rolloff=fl.rolloff, rolloff_db_per_oct=fl.rolloff_db_per_oct,
                             freq_hz=fl.freq_hz.tolist(), fsd_n2_hz=fl.fsd_n2_hz.tolist(),
                             force_rms_n=fl.force_rms_n)
        if cmd.modes:
            total = sum(x.mass_kg for x in cmd.modes) + cmd.residual_mass_kg
            if total > cmd.mass_kg * (1 + 1e-9):
                raise ValidationFailed("modes", total, f"effective masses and residual add up "
                                       f"to {total:g} kg, more than mass_kg = {cmd.mass_kg:g}")
            notched = core_tr.notch_by_force_limit(
                freq_hz, asd_g2_hz, fl, [core_tr.Mode(x.fn_hz, x.mass_kg, x.q)
                                         for x in cmd.modes],
                residual_mass_kg=cmd.residual_mass_kg, max_notch_db=cmd.max_notch_db)
            out.notches = [NotchRead(**n.__dict__) for n in notched.notches]
            out.notched_freq_hz = notched.freq_hz.tolist()
            out.notched_asd_g2_hz = notched.values.tolist()
            out.needs_acceptance = notched.needs_acceptance
    return out


def force_limit(session: Session, environment_id: int, cmd: ForceLimitIn) -> ForceLimitRead:
    """Force limit of the latest revision of a random environment."""
    env = get(session, m.Environment, environment_id, "environment")
    if env.kind is not K.random:
        raise ValidationFailed("environment_id", environment_id,
                               f"environment {env.name!r} is {env.kind.value}; a force limit "
                               "is made from a random (ASD) input")
    rev = RevisionRepository(session).latest(env.id)
    return force_limit_of(rev.spec["freq_hz"], rev.spec["asd_g2_hz"],
                          f"{env.name} r{rev.number}", cmd)


def _level_asd(level: m.Level) -> tuple[list[float], list[float]]:
    """The test ASD of a random level [Hz], [g^2/Hz] (the one place that reads a level's
    result for force limits)."""
    r = level.result
    return r["freq_hz"], r["asd_g2_hz"]


def set_level_force_limit(session: Session, actor: Actor, level_id: int, cmd: ForceLimitIn
                          ) -> m.LevelForceLimit:
    """Set the force limit of a random test level (a new row; the newest applies)."""
    level = get(session, m.Level, level_id, "level")
    require_for(session, actor, level, m.Role.engineer, "setting a force limit")
    if level.kind is not K.random or level.purpose is not m.LevelPurpose.test:
        raise ValidationFailed("level_id", level_id, f"level {level.name!r} is a "
                               f"{level.kind.value} {level.purpose.value} level; force limits "
                               "go with random test levels")
    if cmd.max_notch_db is None and level.policy is not None:  # the policy's limit, as in
        cmd = cmd.model_copy(update={  # response-limit notching
            "max_notch_db": rules_of(level.policy).control.max_notch_db})
    out = force_limit_of(*_level_asd(level), f"{level.name} #{level.number}", cmd)
    row = m.LevelForceLimit(level_id=level.id, params=cmd.model_dump(mode="json"),
                            result=out.model_dump(mode="json"), level_hash=level.level_hash,
                            author=actor.name)
    session.add(row)
    session.flush()
    record(session, actor, "force_limit", "level", level.id, c2=cmd.c2, f0_hz=cmd.f0_hz,
           mass_kg=cmd.mass_kg, notches=len(out.notches))
    return row


def level_force_limit(session: Session, level_id: int) -> ForceLimitRead | None:
    """The newest force limit of a level, or None."""
    row = session.scalar(select(m.LevelForceLimit).where(m.LevelForceLimit.level_id == level_id)
                         .order_by(m.LevelForceLimit.id.desc()).limit(1))
    return None if row is None else ForceLimitRead.model_validate(row.result)


def accept_notches(session: Session, actor: Actor, level_id: int, rationale: str
                   ) -> m.LevelForceLimit:
    """An approver accepts the notches of a level's force limit that are deeper than the
    policy allows: recorded as the level's next force-limit row and an event."""
    require_for(session, actor, get(session, m.Level, level_id, "level"), m.Role.approver,
                "accepting notches deeper than the policy allows")
    if not rationale.strip():
        raise ValidationFailed("rationale", rationale, "must say why the notches are accepted")
    row = session.scalar(select(m.LevelForceLimit).where(m.LevelForceLimit.level_id == level_id)
                         .order_by(m.LevelForceLimit.id.desc()).limit(1))
    if row is None:
        raise ValidationFailed("level_id", level_id, "the level has no force limit")
    if not row.result.get("needs_acceptance"):
        raise Conflict("no notch of this force limit is deeper than the policy allows")
    if row.result.get("accepted_by"):
        raise Conflict(f"the notches were accepted already by {row.result['accepted_by']}")
    result = {**row.result, "accepted_by": actor.name, "acceptance_rationale": rationale}
    new = m.LevelForceLimit(level_id=level_id, params=row.params, result=result,
                            level_hash=row.level_hash, author=actor.name)
    session.add(new)
    session.flush()
    record(session, actor, "accept_notches", "level", level_id, force_limit_id=new.id,
           rationale=rationale,
           depths_db=[n["depth_db"] for n in row.result["notches"] if n["exceeds_policy"]])
    return new
