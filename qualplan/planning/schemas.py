"""Commands (inputs) and read models (outputs) shared by the API, the CLI and the web.

Units are in the field names (``duration_s``, ``freq_hz``, ``asd_g2_hz``, ``accel_g``).
"""

from __future__ import annotations

from datetime import datetime
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field

from qualplan.planning.results import LevelResult
from qualplan.store.models import (
    Axis,
    EnvironmentKind,
    EvidenceKind,
    Grade,
    LevelPurpose,
    Role,
    Verdict,
    VerificationMethod,
)

Status = Literal["open", "verified", "failed", "stale", "waived"]


class Read(BaseModel):
    model_config = ConfigDict(from_attributes=True)


class Command(BaseModel):
    model_config = ConfigDict(extra="forbid")


# --- programs, products, phases -------------------------------------------------------


class ProgramCreate(Command):
    name: str = Field(min_length=1, max_length=200)
    description: str = ""


class ProgramUpdate(Command):
    description: str


class ProgramRead(Read):
    id: int
    name: str
    description: str
    version: int
    created_at: datetime


class ProductCreate(Command):
    program_id: int
    name: str = Field(min_length=1, max_length=200)
    parent_id: int | None = None
    part_number: str = ""
    mass_kg: float | None = Field(default=None, gt=0)
    description: str = ""


class ProductRead(Read):
    id: int
    program_id: int
    parent_id: int | None
    name: str
    part_number: str
    mass_kg: float | None
    description: str
    version: int


class ProductNode(BaseModel):
    product: ProductRead
    children: list[ProductNode] = []


class PhaseCreate(Command):
    program_id: int
    name: str = Field(min_length=1, max_length=200)
    duration_s: float = Field(gt=0, description="Duration of one occurrence [s]")
    occurrences: int = Field(default=1, ge=1)
    position: int = 0
    description: str = ""


class PhaseRead(Read):
    id: int
    program_id: int
    name: str
    duration_s: float
    occurrences: int
    position: int
    description: str
    version: int


# --- environments ---------------------------------------------------------------------


class EnvironmentCreate(Command):
    product_id: int
    phase_id: int | None = None
    name: str = Field(min_length=1, max_length=200)
    kind: EnvironmentKind
    axis: Axis
    source: str = ""
    provenance: str = ""
    #: The data of the first revision; its form depends on `kind` (see RevisionIn).
    data: dict[str, Any]
    note: str = ""


class RevisionIn(Command):
    """A new revision: the whole data (revisions are complete, never partial edits).

    random: ``{"freq_hz": [...], "asd_g2_hz": [...]}``; optional ``duration_s`` (one
    exposure; default the phase's occurrence duration).
    shock: ``{"freq_hz": [...], "accel_g": [...], "q": 10}``; optional ``count``.
    sine: ``{"bands": [{"f_lo_hz", "f_hi_hz", "quantity", "amplitude", "measure"}],
    "sweep": {"rate_oct_per_min" | "rate_hz_per_s", "direction", "sweeps"}}``.
    time_history: ``{"dt_s": ..., "accel_g": [...]}`` (long records go in as files).
    """

    data: dict[str, Any]
    note: str = ""
    expected_revision: int | None = Field(
        default=None, description="Number of the revision this one replaces (concurrency)"
    )


class FileReading(Command):
    """How to read an uploaded file: units of its values and what a record needs."""

    value_units: str | None = None
    freq_units: str = "Hz"
    sample_rate_hz: float | None = Field(default=None, gt=0)
    calibration: float | None = Field(default=None, gt=0)
    variable: str | None = None


class EnvironmentFromFile(Command):
    """An environment whose first revision is read from a file (the file comes beside)."""

    product_id: int
    phase_id: int | None = None
    name: str = Field(min_length=1, max_length=200)
    kind: EnvironmentKind
    axis: Axis
    source: str = ""
    provenance: str = ""
    note: str = ""
    reading: FileReading = FileReading()


class EnvironmentRead(Read):
    id: int
    product_id: int
    phase_id: int | None
    name: str
    kind: EnvironmentKind
    axis: Axis
    units: str
    source: str
    provenance: str
    latest_revision: int | None = None


class RevisionRead(BaseModel):
    id: int
    environment_id: int
    number: int
    spec: dict[str, Any]
    samples: int | None = None
    content_hash: str
    author: str
    note: str
    created_at: datetime
    summary: dict[str, Any] = {}


class RevisionComparison(BaseModel):
    environment_id: int
    a: int
    b: int
    kind: EnvironmentKind
    #: Overall measures of each revision, each a {"value": v, "unit": u} pair.
    a_summary: dict[str, Any]
    b_summary: dict[str, Any]
    max_difference_db: float | None
    max_difference_at_hz: float | None
    notes: list[str] = []


# --- margin policies ------------------------------------------------------------------


class RandomRule(BaseModel):
    margin_db: float = Field(description="Added to the limit level [dB]")
    duration_s: float | None = Field(
        default=None, gt=0, description="Fixed test duration per axis [s]"
    )
    duration_factor: float | None = Field(
        default=None, gt=0, description="Test duration = factor x life exposure"
    )
    compression_exponent: float | None = Field(
        default=None, gt=0, description="Inverse-power-law exponent m in g rms (time compression)"
    )
    minimum_profile: dict[str, list[float]] | None = Field(
        default=None, description="Floor PSD {freq_hz, asd_g2_hz} the level may not go below"
    )
    tolerance_db: float = Field(default=3.0, gt=0, description="+/- band on the ASD [dB]")
    grms_tolerance_pct: float = Field(default=10.0, gt=0, description="+/- on overall g rms [%]")
    duration_tolerance_pct: float = Field(
        default=10.0, ge=0, description="Shortest accepted duration, -x % [%]"
    )
    basis: str = ""


class SineRule(BaseModel):
    factor: float = Field(gt=0, description="Multiplier on the limit amplitude")
    sweep_rate_oct_per_min: float = Field(gt=0)
    direction: Literal["up", "down", "up-down"] = "up"
    sweeps: int = Field(default=1, ge=1)
    tolerance_pct: float = Field(default=10.0, gt=0, description="+/- on amplitude [%]")
    basis: str = ""


class ShockRule(BaseModel):
    margin_db: float = Field(description="Added to the SRS [dB]")
    shocks_per_direction: int = Field(ge=1, description="Shocks in each loaded direction")
    directions: Literal["one", "both"] = Field(
        default="one", description="Shock along one direction of each axis, or both (+ and -)"
    )
    lower_db: float = Field(default=-6.0, lt=0, description="Lower tolerance band [dB]")
    upper_db: float = Field(default=6.0, gt=0, description="Upper tolerance band [dB]")
    outer_lower_db: float | None = Field(
        default=None, lt=0, description="Outer band for the points allowed outside"
    )
    outer_upper_db: float | None = Field(default=None, gt=0)
    min_share_within_band: float = Field(
        default=1.0, gt=0, le=1, description="Share of points inside the band"
    )
    min_fraction_above_nominal: float = Field(default=0.5, ge=0, le=1)
    q: float = Field(default=10.0, gt=0.5)
    basis: str = ""


class AnalysisRule(BaseModel):
    margin_db: float = Field(default=0.0, description="Analysis margin on the limit level [dB]")
    basis: str = ""


class EquivalenceRule(BaseModel):
    q: float = Field(default=10.0, gt=0.5)
    b: list[float] = Field(default=[8.0], min_length=1)
    f_lo_hz: float = Field(default=20.0, gt=0)
    f_hi_hz: float = Field(default=2000.0, gt=0)
    points_per_octave: int = Field(default=6, ge=1, le=48)
    fds_margin_db: float = Field(default=0.0, description="Required test/life FDS ratio [dB]")
    ers_margin_db: float = Field(default=0.0, description="Required test/life ERS ratio [dB]")
    overtest_limit_db: float = Field(
        default=6.0, gt=0, description="Test ERS above life ERS flagged beyond this [dB]"
    )
    basis: str = ""


class PolicyRules(BaseModel):
    model_config = ConfigDict(extra="forbid")
    random: dict[Grade, RandomRule]
    sine: dict[Grade, SineRule]
    shock: dict[Grade, ShockRule]
    analysis: AnalysisRule = AnalysisRule()
    equivalence: EquivalenceRule = EquivalenceRule()


class PolicyRead(Read):
    id: int
    name: str
    description: str
    basis: str
    rules: PolicyRules
    copied_from_id: int | None
    version: int


class PolicyCopy(Command):
    name: str = Field(min_length=1, max_length=200)
    description: str | None = None


class PolicyUpdate(Command):
    rules: PolicyRules
    description: str | None = None


# --- levels ---------------------------------------------------------------------------


class LevelRecipe(Command):
    product_id: int
    name: str = Field(min_length=1, max_length=200)
    purpose: LevelPurpose = LevelPurpose.test
    grade: Grade = Grade.qualification
    kind: Literal["random", "sine", "shock"]
    axis: Axis
    revision_ids: list[int] = Field(min_length=1)
    #: envelope: maximum envelope; p95_50: normal tolerance limit of measured spectra;
    #: fds_equivalent (random test levels): the PSD that in the test duration does the
    #: fatigue damage of the chosen environments (any kinds) over their exposures.
    combination: Literal["envelope", "p95_50", "fds_equivalent"] = "envelope"
    max_breakpoints: int = Field(default=12, ge=2, le=200)
    policy_id: int
    #: Natural frequency and Q for the quick equivalent-static load factor (analysis).
    load_factor_fn_hz: float | None = Field(default=None, gt=0)
    load_factor_q: float = Field(default=10.0, gt=0.5)


class LevelRead(Read):
    id: int
    product_id: int
    policy_id: int | None
    name: str
    number: int
    purpose: LevelPurpose
    grade: Grade | None
    kind: EnvironmentKind
    axis: Axis
    recipe: dict[str, Any]
    #: The typed result (planning.results), discriminated on ``kind``.
    result: LevelResult
    input_hashes: dict[str, Any]
    level_hash: str
    author: str
    created_at: datetime
    #: Name of the margin policy the level was derived under.
    policy_name: str | None = None
    stale: bool = False
    stale_reasons: list[str] = []


# --- requirements, evidence, waivers --------------------------------------------------


class RequirementCreate(Command):
    program_id: int
    key: str = Field(min_length=1, max_length=80)
    text: str = Field(min_length=1)
    product_id: int
    level_id: int | None = None
    method: VerificationMethod
    acceptance_criterion: str = ""
    required_margin: float = 0.0


class RequirementUpdate(Command):
    text: str | None = None
    level_id: int | None = None
    method: VerificationMethod | None = None
    acceptance_criterion: str | None = None
    required_margin: float | None = None
    expected_version: int = Field(description="The version the edit was made from")


class RequirementRead(Read):
    id: int
    program_id: int
    key: str
    text: str
    product_id: int
    level_id: int | None
    method: VerificationMethod
    acceptance_criterion: str
    required_margin: float
    version: int
    status: Status = "open"
    status_reason: str = ""


class TraceRow(BaseModel):
    """One line of the traceability matrix: a requirement, its level and latest evidence."""

    requirement: RequirementRead
    product: str
    #: Level the requirement points at, as "name #number" ("" when none).
    level: str
    evidence_id: int | None = None
    evidence_kind: EvidenceKind | None = None
    evidence_verdict: Verdict | None = None
    evidence_achieved_margin: float | None = None
    evidence_at: datetime | None = None


#: Orders of the traceability matrix.
TraceSort = Literal["key", "product", "level", "method", "status", "evidence"]


class AnalysisEvidenceIn(Command):
    applied: float = Field(description="Applied (computed) value, in `units`")
    allowable: float = Field(description="Allowable value, in `units`")
    units: str = Field(min_length=1)
    factor_of_safety: float = Field(default=1.0, gt=0)
    note: str = ""


class TestEvidenceIn(Command):
    """An achieved test record, as arrays (a file reader turns uploads into this)."""

    freq_hz: list[float] = Field(min_length=2)
    values: list[float] = Field(
        min_length=2, description="g^2/Hz (random), g SRS (shock) or g peak (sine)"
    )
    duration_s: float | None = Field(default=None, gt=0)
    shocks: int | None = Field(default=None, ge=0)
    note: str = ""


class SimilarityEvidenceIn(Command):
    similar_requirement_id: int
    rationale: str = Field(min_length=10)


class InspectionEvidenceIn(Command):
    passed: bool
    note: str = Field(min_length=3)


class EvidenceRead(Read):
    id: int
    requirement_id: int
    kind: EvidenceKind
    level_id: int | None
    level_hash: str | None
    verdict: Verdict
    achieved_margin: float | None
    summary: dict[str, Any]
    similar_requirement_id: int | None
    rationale: str
    author: str
    created_at: datetime


class WaiverIn(Command):
    rationale: str = Field(min_length=10)
    expires_at: datetime


class WaiverRead(Read):
    id: int
    requirement_id: int
    approver: str
    rationale: str
    expires_at: datetime
    created_at: datetime
    revoked_at: datetime | None


# --- audit ----------------------------------------------------------------------------


class AuditItem(BaseModel):
    key: str
    requirement_id: int
    product: str
    level: str | None
    method: VerificationMethod
    status: Status
    reason: str
    required_margin: float
    achieved_margin: float | None
    #: Unit of the margins: "MS" (margin of safety) for analysis, "dB" for tests.
    margin_unit: str = ""
    shortfall: float | None
    evidence_id: int | None


class AuditReport(BaseModel):
    program: str
    scope: str
    generated_at: datetime
    counts: dict[str, int]
    items: list[AuditItem]
    release_ready: bool
    verdict: str


# --- users ----------------------------------------------------------------------------


class UserCreate(Command):
    name: str = Field(min_length=1, max_length=120)
    role: Role


class UserRead(Read):
    id: int
    name: str
    role: Role
    active: bool


class Page(BaseModel):
    items: list[Any]
    total: int
    offset: int
    limit: int
