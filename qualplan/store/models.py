"""SQLAlchemy 2 models for every noun of the design.

Immutable rows (EnvironmentRevision, Level, Evidence, Event) are guarded twice:
the ORM refuses to flush an update or a delete of them
(:mod:`qualplan.store.guards`), and the migrations add database triggers that
refuse the same through raw SQL.

Editable rows carry a ``version`` column used for optimistic concurrency: an
update whose version no longer matches the row raises ``StaleDataError``.
"""

from __future__ import annotations

import enum
from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import (
    JSON,
    CheckConstraint,
    Enum,
    Float,
    ForeignKey,
    Integer,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.orm import Mapped, mapped_column, relationship

from qualplan.store.base import Base
from qualplan.store.types import ArrayBlob, UtcDateTime, utcnow


class Role(enum.StrEnum):
    viewer = "viewer"
    engineer = "engineer"
    approver = "approver"
    admin = "admin"


class EnvironmentKind(enum.StrEnum):
    random = "random"
    sine = "sine"
    shock = "shock"
    time_history = "time_history"


class Axis(enum.StrEnum):
    X = "X"
    Y = "Y"
    Z = "Z"
    all = "all"


class Grade(enum.StrEnum):
    qualification = "qualification"
    acceptance = "acceptance"
    protoflight = "protoflight"


class LevelPurpose(enum.StrEnum):
    test = "test"
    analysis = "analysis"


class VerificationMethod(enum.StrEnum):
    test = "test"
    analysis = "analysis"
    similarity = "similarity"
    inspection = "inspection"


class EvidenceKind(enum.StrEnum):
    analysis = "analysis"
    test = "test"
    similarity = "similarity"
    inspection = "inspection"


class Verdict(enum.StrEnum):
    passed = "pass"
    failed = "fail"


def _enum(cls: type[enum.Enum], name: str) -> Enum:
    """A portable enum column: VARCHAR plus a CHECK constraint on every backend."""
    return Enum(
        cls,
        name=name,
        native_enum=False,
        create_constraint=True,
        validate_strings=True,
        values_callable=lambda e: [m.value for m in e],
        length=20,
    )


class User(Base):
    __tablename__ = "users"

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(120), unique=True)
    role: Mapped[Role] = mapped_column(_enum(Role, "role"))
    active: Mapped[bool] = mapped_column(default=True)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    tokens: Mapped[list[ApiToken]] = relationship(back_populates="user")


class ApiToken(Base):
    """A bearer token; only its SHA-256 hash is stored, never the token."""

    __tablename__ = "api_tokens"

    id: Mapped[int] = mapped_column(primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    token_hash: Mapped[str] = mapped_column(String(64), unique=True)
    #: First characters of the token, shown in listings so a user can tell tokens apart.
    prefix: Mapped[str] = mapped_column(String(12))
    label: Mapped[str] = mapped_column(String(120), default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    revoked_at: Mapped[datetime | None] = mapped_column(UtcDateTime())

    user: Mapped[User] = relationship(back_populates="tokens")


class Program(Base):
    __tablename__ = "programs"

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    description: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    products: Mapped[list[Product]] = relationship(back_populates="program")
    phases: Mapped[list[Phase]] = relationship(back_populates="program", order_by="Phase.position")

    __mapper_args__ = {"version_id_col": version}


class Product(Base):
    """A system, subsystem or unit; a tree through ``parent_id``."""

    __tablename__ = "products"
    __table_args__ = (
        UniqueConstraint("program_id", "name"),
        CheckConstraint("mass_kg IS NULL OR mass_kg > 0", name="mass_positive"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    program_id: Mapped[int] = mapped_column(ForeignKey("programs.id"), index=True)
    parent_id: Mapped[int | None] = mapped_column(ForeignKey("products.id"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    part_number: Mapped[str] = mapped_column(String(120), default="")
    mass_kg: Mapped[float | None] = mapped_column(Float)
    description: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    program: Mapped[Program] = relationship(back_populates="products")
    parent: Mapped[Product | None] = relationship(remote_side=[id], back_populates="children")
    children: Mapped[list[Product]] = relationship(back_populates="parent")

    __mapper_args__ = {"version_id_col": version}


class Phase(Base):
    """A life-cycle phase: duration of one occurrence and how many occurrences."""

    __tablename__ = "phases"
    __table_args__ = (
        UniqueConstraint("program_id", "name"),
        CheckConstraint("duration_s > 0", name="duration_positive"),
        CheckConstraint("occurrences >= 1", name="occurrences_positive"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    program_id: Mapped[int] = mapped_column(ForeignKey("programs.id"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    duration_s: Mapped[float] = mapped_column(Float)
    occurrences: Mapped[int] = mapped_column(Integer, default=1)
    position: Mapped[int] = mapped_column(Integer, default=0)
    description: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    program: Mapped[Program] = relationship(back_populates="phases")

    __mapper_args__ = {"version_id_col": version}


class Environment(Base):
    """One environment of a product: kind, axis, phase, source. Data live in revisions."""

    __tablename__ = "environments"
    __table_args__ = (UniqueConstraint("product_id", "name"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    product_id: Mapped[int] = mapped_column(ForeignKey("products.id"), index=True)
    phase_id: Mapped[int | None] = mapped_column(ForeignKey("phases.id"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    kind: Mapped[EnvironmentKind] = mapped_column(_enum(EnvironmentKind, "environment_kind"))
    axis: Mapped[Axis] = mapped_column(_enum(Axis, "axis"))
    #: Units of the stored data, e.g. "g^2/Hz", "g", "g peak".
    units: Mapped[str] = mapped_column(String(40))
    source: Mapped[str] = mapped_column(Text, default="")
    provenance: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    product: Mapped[Product] = relationship()
    phase: Mapped[Phase | None] = relationship()
    revisions: Mapped[list[EnvironmentRevision]] = relationship(
        back_populates="environment", order_by="EnvironmentRevision.number"
    )

    __mapper_args__ = {"version_id_col": version}


class EnvironmentRevision(Base):
    """Immutable content of an environment: a spec (JSON) and optional array data.

    ``spec`` holds small tables (breakpoints, sine bands) and parameters
    (durations, sample interval); ``data`` holds long arrays (time histories,
    measured spectra) as a compressed .npy blob. ``content_hash`` is the SHA-256
    of both in canonical form (:func:`qualplan.store.hashing.revision_hash`).
    """

    __tablename__ = "environment_revisions"
    __table_args__ = (UniqueConstraint("environment_id", "number"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    environment_id: Mapped[int] = mapped_column(ForeignKey("environments.id"), index=True)
    number: Mapped[int] = mapped_column(Integer)
    spec: Mapped[dict[str, Any]] = mapped_column(JSON)
    data: Mapped[np.ndarray | None] = mapped_column(ArrayBlob())
    content_hash: Mapped[str] = mapped_column(String(64), index=True)
    author: Mapped[str] = mapped_column(String(120))
    note: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    environment: Mapped[Environment] = relationship(back_populates="revisions")


class MarginPolicy(Base):
    """A named, editable rule set per grade and kind (see planning.policies)."""

    __tablename__ = "margin_policies"

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    description: Mapped[str] = mapped_column(Text, default="")
    #: The published standard the defaults come from, when any.
    basis: Mapped[str] = mapped_column(Text, default="")
    rules: Mapped[dict[str, Any]] = mapped_column(JSON)
    copied_from_id: Mapped[int | None] = mapped_column(ForeignKey("margin_policies.id"))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    updated_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    __mapper_args__ = {"version_id_col": version}


class Level(Base):
    """A derived test or analysis level: recipe, result and the hash of every input.

    Immutable: deriving again makes a new row with the next ``number``.
    """

    __tablename__ = "levels"
    __table_args__ = (UniqueConstraint("product_id", "name", "number"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    product_id: Mapped[int] = mapped_column(ForeignKey("products.id"), index=True)
    policy_id: Mapped[int | None] = mapped_column(ForeignKey("margin_policies.id"))
    name: Mapped[str] = mapped_column(String(200))
    number: Mapped[int] = mapped_column(Integer, default=1)
    purpose: Mapped[LevelPurpose] = mapped_column(_enum(LevelPurpose, "level_purpose"))
    grade: Mapped[Grade | None] = mapped_column(_enum(Grade, "grade"))
    kind: Mapped[EnvironmentKind] = mapped_column(_enum(EnvironmentKind, "level_kind"))
    axis: Mapped[Axis] = mapped_column(_enum(Axis, "level_axis"))
    recipe: Mapped[dict[str, Any]] = mapped_column(JSON)
    result: Mapped[dict[str, Any]] = mapped_column(JSON)
    #: {revision id: content hash} of every environment revision used, plus the policy.
    input_hashes: Mapped[dict[str, Any]] = mapped_column(JSON)
    level_hash: Mapped[str] = mapped_column(String(64), index=True)
    author: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    product: Mapped[Product] = relationship()
    policy: Mapped[MarginPolicy | None] = relationship()


class Requirement(Base):
    __tablename__ = "requirements"
    __table_args__ = (UniqueConstraint("program_id", "key"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    program_id: Mapped[int] = mapped_column(ForeignKey("programs.id"), index=True)
    product_id: Mapped[int] = mapped_column(ForeignKey("products.id"), index=True)
    level_id: Mapped[int | None] = mapped_column(ForeignKey("levels.id"), index=True)
    key: Mapped[str] = mapped_column(String(80))
    text: Mapped[str] = mapped_column(Text)
    method: Mapped[VerificationMethod] = mapped_column(
        _enum(VerificationMethod, "verification_method")
    )
    acceptance_criterion: Mapped[str] = mapped_column(Text, default="")
    #: Margin the evidence must show, in the unit of the criterion (e.g. MS >= 0, or dB).
    required_margin: Mapped[float] = mapped_column(Float, default=0.0)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    updated_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    program: Mapped[Program] = relationship()
    product: Mapped[Product] = relationship()
    level: Mapped[Level | None] = relationship()
    evidence: Mapped[list[Evidence]] = relationship(
        back_populates="requirement",
        order_by="Evidence.id",
        foreign_keys="Evidence.requirement_id",
    )
    waivers: Mapped[list[Waiver]] = relationship(back_populates="requirement", order_by="Waiver.id")

    __mapper_args__ = {"version_id_col": version}


class Evidence(Base):
    """An analysis result, a test record or a similarity claim, made against a level hash.

    Immutable: new evidence is added, old evidence is never edited.
    """

    __tablename__ = "evidence"

    id: Mapped[int] = mapped_column(primary_key=True)
    requirement_id: Mapped[int] = mapped_column(ForeignKey("requirements.id"), index=True)
    kind: Mapped[EvidenceKind] = mapped_column(_enum(EvidenceKind, "evidence_kind"))
    level_id: Mapped[int | None] = mapped_column(ForeignKey("levels.id"))
    #: The level hash the evidence was made against; a different current hash = stale.
    level_hash: Mapped[str | None] = mapped_column(String(64))
    verdict: Mapped[Verdict] = mapped_column(_enum(Verdict, "verdict"))
    #: Achieved margin in the unit of the requirement's criterion.
    achieved_margin: Mapped[float | None] = mapped_column(Float)
    summary: Mapped[dict[str, Any]] = mapped_column(JSON)
    data: Mapped[np.ndarray | None] = mapped_column(ArrayBlob())
    similar_requirement_id: Mapped[int | None] = mapped_column(ForeignKey("requirements.id"))
    rationale: Mapped[str] = mapped_column(Text, default="")
    author: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    requirement: Mapped[Requirement] = relationship(
        back_populates="evidence", foreign_keys=[requirement_id]
    )
    level: Mapped[Level | None] = relationship()


class Waiver(Base):
    """An approver's waiver of a requirement, with rationale and expiry."""

    __tablename__ = "waivers"

    id: Mapped[int] = mapped_column(primary_key=True)
    requirement_id: Mapped[int] = mapped_column(ForeignKey("requirements.id"), index=True)
    approver: Mapped[str] = mapped_column(String(120))
    rationale: Mapped[str] = mapped_column(Text)
    expires_at: Mapped[datetime] = mapped_column(UtcDateTime())
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    revoked_at: Mapped[datetime | None] = mapped_column(UtcDateTime())
    #: The request the waiver answers (who asked for it), when there was one.
    request_id: Mapped[int | None] = mapped_column(ForeignKey("waiver_requests.id"))
    #: The requirement had no evidence at all when it was waived (an admin's decision).
    without_evidence: Mapped[bool] = mapped_column(default=False, server_default="0")

    requirement: Mapped[Requirement] = relationship(back_populates="waivers")


class WaiverRequest(Base):
    """An engineer's request that a requirement be waived. Append-only."""

    __tablename__ = "waiver_requests"

    id: Mapped[int] = mapped_column(primary_key=True)
    requirement_id: Mapped[int] = mapped_column(ForeignKey("requirements.id"), index=True)
    requested_by: Mapped[str] = mapped_column(String(120))
    reason: Mapped[str] = mapped_column(Text)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)


class Event(Base):
    """Who did what, when. Append-only."""

    __tablename__ = "events"

    id: Mapped[int] = mapped_column(primary_key=True)
    at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow, index=True)
    actor: Mapped[str] = mapped_column(String(120))
    action: Mapped[str] = mapped_column(String(60))
    entity: Mapped[str] = mapped_column(String(60))
    entity_id: Mapped[int | None] = mapped_column(Integer)
    detail: Mapped[dict[str, Any]] = mapped_column(JSON, default=dict)


#: Tables whose rows are never updated or deleted once written.
IMMUTABLE_MODELS: tuple[type[Base], ...] = (EnvironmentRevision, Level, Evidence, Event)


class DocumentKind(enum.StrEnum):
    specification = "specification"
    audit = "audit"
    loads = "loads"


class Document(Base):
    """An issued document (test-level specification or audit report) and its hashes.

    Immutable once issued: a re-issue is a new row with the next revision.
    """

    __tablename__ = "documents"
    __table_args__ = (UniqueConstraint("number", "revision"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    program_id: Mapped[int] = mapped_column(ForeignKey("programs.id"), index=True)
    #: The product the document is about; None for a program-wide audit.
    product_id: Mapped[int | None] = mapped_column(ForeignKey("products.id"), index=True)
    kind: Mapped[DocumentKind] = mapped_column(_enum(DocumentKind, "document_kind"))
    number: Mapped[str] = mapped_column(String(80))
    revision: Mapped[int] = mapped_column(Integer, default=1)
    title: Mapped[str] = mapped_column(Text, default="")
    #: SHA-256 of the document's content (the data it shows, not the PDF bytes).
    content_hash: Mapped[str] = mapped_column(String(64))
    input_hashes: Mapped[dict[str, Any]] = mapped_column(JSON)
    note: Mapped[str] = mapped_column(Text, default="")
    author: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    #: SHA-256 of the row's other columns (:func:`qualplan.store.hashing.document_row_hash`),
    #: set on insert and checked whenever the row is read.
    row_hash: Mapped[str] = mapped_column(String(64))


IMMUTABLE_MODELS = (*IMMUTABLE_MODELS, Document)


class ModalSummary(Base):
    """A product's table of modes from a structural model; data live in revisions."""

    __tablename__ = "modal_summaries"
    __table_args__ = (UniqueConstraint("product_id", "name"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    product_id: Mapped[int] = mapped_column(ForeignKey("products.id"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    source: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    product: Mapped[Product] = relationship()
    revisions: Mapped[list[ModalSummaryRevision]] = relationship(
        back_populates="summary", order_by="ModalSummaryRevision.number"
    )

    __mapper_args__ = {"version_id_col": version}


class ModalSummaryRevision(Base):
    """Immutable content of a modal summary: the modes (JSON) and their content hash."""

    __tablename__ = "modal_summary_revisions"
    __table_args__ = (UniqueConstraint("summary_id", "number"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    summary_id: Mapped[int] = mapped_column(ForeignKey("modal_summaries.id"), index=True)
    number: Mapped[int] = mapped_column(Integer)
    #: {"modes": [{"fn_hz", "zeta", "meff_kg": {axis: kg}, ...}], "response_unit", ...}
    spec: Mapped[dict[str, Any]] = mapped_column(JSON)
    content_hash: Mapped[str] = mapped_column(String(64), index=True)
    author: Mapped[str] = mapped_column(String(120))
    note: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    summary: Mapped[ModalSummary] = relationship(back_populates="revisions")


class ResponseEstimate(Base):
    """A peak-response estimate from a modal summary revision and a level. Immutable."""

    __tablename__ = "response_estimates"

    id: Mapped[int] = mapped_column(primary_key=True)
    product_id: Mapped[int] = mapped_column(ForeignKey("products.id"), index=True)
    modal_revision_id: Mapped[int] = mapped_column(
        ForeignKey("modal_summary_revisions.id"), index=True
    )
    level_id: Mapped[int] = mapped_column(ForeignKey("levels.id"), index=True)
    axis: Mapped[Axis] = mapped_column(_enum(Axis, "estimate_axis"))
    settings: Mapped[dict[str, Any]] = mapped_column(JSON)
    result: Mapped[dict[str, Any]] = mapped_column(JSON)
    #: The modal revision's content hash and the level's hash the estimate was made from.
    input_hashes: Mapped[dict[str, Any]] = mapped_column(JSON)
    estimate_hash: Mapped[str] = mapped_column(String(64), index=True)
    author: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    modal_revision: Mapped[ModalSummaryRevision] = relationship()
    level: Mapped[Level] = relationship()


IMMUTABLE_MODELS = (*IMMUTABLE_MODELS, ModalSummaryRevision, ResponseEstimate)


# --- environments down the product tree (planning.transfers) -----------------------------


class Mounting(Base):
    """A product's orientation in its parent: direction cosines of its axes (editable)."""

    __tablename__ = "mountings"

    id: Mapped[int] = mapped_column(primary_key=True)
    product_id: Mapped[int] = mapped_column(ForeignKey("products.id"), unique=True)
    #: {"matrix": 3x3 direction cosines, rows child X, Y, Z; "axes": signed permutation or
    #: None}.
    frame: Mapped[dict[str, Any]] = mapped_column(JSON)
    note: Mapped[str] = mapped_column(Text, default="")
    author: Mapped[str] = mapped_column(String(120))
    updated_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)
    version: Mapped[int] = mapped_column(Integer, default=1)

    product: Mapped[Product] = relationship()

    __mapper_args__ = {"version_id_col": version}


class TransferRule(Base):
    """A named rule carrying environments from a parent to a child (zone
    transmissibility or mass attenuation). Its content lives in revisions."""

    __tablename__ = "transfer_rules"
    __table_args__ = (UniqueConstraint("program_id", "name"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    program_id: Mapped[int] = mapped_column(ForeignKey("programs.id"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    #: "zone_transmissibility" or "mass_attenuation".
    kind: Mapped[str] = mapped_column(String(40))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    revisions: Mapped[list[TransferRuleRevision]] = relationship(
        back_populates="rule", order_by="TransferRuleRevision.number"
    )


class TransferRuleRevision(Base):
    """Immutable content of a transfer rule, with where it came from."""

    __tablename__ = "transfer_rule_revisions"
    __table_args__ = (UniqueConstraint("rule_id", "number"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    rule_id: Mapped[int] = mapped_column(ForeignKey("transfer_rules.id"), index=True)
    number: Mapped[int] = mapped_column(Integer)
    spec: Mapped[dict[str, Any]] = mapped_column(JSON)
    #: "test", "analysis" or "handbook" (how the numbers were obtained).
    basis: Mapped[str] = mapped_column(String(40))
    provenance: Mapped[str] = mapped_column(Text, default="")
    content_hash: Mapped[str] = mapped_column(String(64))
    author: Mapped[str] = mapped_column(String(120))
    note: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    rule: Mapped[TransferRule] = relationship(back_populates="revisions")


class EnvironmentDerivation(Base):
    """How a transferred environment revision was made: recipe and input hashes."""

    __tablename__ = "environment_derivations"

    id: Mapped[int] = mapped_column(primary_key=True)
    revision_id: Mapped[int] = mapped_column(
        ForeignKey("environment_revisions.id"), unique=True
    )
    product_id: Mapped[int] = mapped_column(ForeignKey("products.id"), index=True)
    recipe: Mapped[dict[str, Any]] = mapped_column(JSON)
    input_hashes: Mapped[dict[str, Any]] = mapped_column(JSON)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)

    revision: Mapped[EnvironmentRevision] = relationship()


class LevelForceLimit(Base):
    """A force limit (NASA-HDBK-7004 semi-empirical) set for a random test level, with its
    predicted notches; the newest row of a level applies. Append-only."""

    __tablename__ = "level_force_limits"

    id: Mapped[int] = mapped_column(primary_key=True)
    level_id: Mapped[int] = mapped_column(ForeignKey("levels.id"), index=True)
    #: The inputs: mass_kg, c2, f0_hz, rolloff, modes, residual_mass_kg, max_notch_db.
    params: Mapped[dict[str, Any]] = mapped_column(JSON)
    #: The limit [Hz, N^2/Hz], overall N rms and the notches.
    result: Mapped[dict[str, Any]] = mapped_column(JSON)
    level_hash: Mapped[str] = mapped_column(String(64))
    author: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)


# --- withdrawal, supersession, baselines and sign-off (planning.approvals) ---------------


class Withdrawal(Base):
    """An environment or a level taken out of the life cycle, the derivations and the
    default baselines, with the reason. Append-only: history keeps it."""

    __tablename__ = "withdrawals"
    __table_args__ = (
        CheckConstraint("(environment_id IS NULL) <> (level_id IS NULL)",
                        name="one_target"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    environment_id: Mapped[int | None] = mapped_column(ForeignKey("environments.id"),
                                                       unique=True)
    level_id: Mapped[int | None] = mapped_column(ForeignKey("levels.id"), unique=True)
    reason: Mapped[str] = mapped_column(Text)
    actor: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)


class LevelSupersession(Base):
    """A level re-derived on the latest revisions of its inputs: the new level
    supersedes the old one. Append-only."""

    __tablename__ = "level_supersessions"

    id: Mapped[int] = mapped_column(primary_key=True)
    old_level_id: Mapped[int] = mapped_column(ForeignKey("levels.id"), unique=True)
    new_level_id: Mapped[int] = mapped_column(ForeignKey("levels.id"), unique=True)
    #: Per breakpoint and overall differences in dB, as shown before storing.
    difference: Mapped[dict[str, Any]] = mapped_column(JSON)
    actor: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)


class DocumentLevel(Base):
    """One level a specification document issues (the stored selection). Append-only."""

    __tablename__ = "document_levels"
    __table_args__ = (UniqueConstraint("document_id", "level_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    document_id: Mapped[int] = mapped_column(ForeignKey("documents.id"), index=True)
    level_id: Mapped[int] = mapped_column(ForeignKey("levels.id"))
    position: Mapped[int] = mapped_column(Integer)


class SignoffRole(enum.StrEnum):
    prepared = "prepared"
    checked = "checked"
    approved = "approved"


class Signoff(Base):
    """A user's signature of an issued document revision in one role. Append-only."""

    __tablename__ = "signoffs"
    __table_args__ = (
        UniqueConstraint("document_id", "role"),
        UniqueConstraint("document_id", "user_name"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    document_id: Mapped[int] = mapped_column(ForeignKey("documents.id"), index=True)
    role: Mapped[SignoffRole] = mapped_column(_enum(SignoffRole, "signoff_role"))
    user_name: Mapped[str] = mapped_column(String(120))
    signed_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)


IMMUTABLE_MODELS = (*IMMUTABLE_MODELS, WaiverRequest, Withdrawal, LevelSupersession,
                    DocumentLevel, Signoff)

class LevelNotching(Base):
    """Response-limit notching of a random or sine test level: the response limit at a
    control or monitor location, the transmissibility it is reached through (with its
    source), the notched input and each notch; the newest row of a level applies (an
    approver's acceptance of notches deeper than allowed is the next row). Append-only."""

    __tablename__ = "level_notchings"

    id: Mapped[int] = mapped_column(primary_key=True)
    level_id: Mapped[int] = mapped_column(ForeignKey("levels.id"), index=True)
    #: The inputs: location, limit (constant or table), transmissibility table and its
    #: source, max_notch_db.
    params: Mapped[dict[str, Any]] = mapped_column(JSON)
    #: The notched input [Hz; g^2/Hz or g peak], the notches, acceptance.
    result: Mapped[dict[str, Any]] = mapped_column(JSON)
    level_hash: Mapped[str] = mapped_column(String(64))
    author: Mapped[str] = mapped_column(String(120))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime(), default=utcnow)


IMMUTABLE_MODELS = (*IMMUTABLE_MODELS, TransferRuleRevision, EnvironmentDerivation,
                    LevelForceLimit, LevelNotching)


# Chunked multi-channel records (their own module; append-only like revisions).
from qualplan.store.records import RECORD_MODELS  # noqa: E402

IMMUTABLE_MODELS = (*IMMUTABLE_MODELS, *RECORD_MODELS)
