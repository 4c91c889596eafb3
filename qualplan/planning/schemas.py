"""Commands (inputs) and read models (outputs) shared by the API, the CLI and the web.

Units are in the field names (``duration_s``, ``freq_hz``, ``asd_g2_hz``, ``accel_g``).
"""

from __future__ import annotations

import enum
from datetime import datetime
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from qualplan.planning.inputs import Id, Int, Key, Line, Name, Num, Text
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
    name: Name
    description: Text = ""


class ProgramUpdate(Command):
    description: Text


class ProgramRead(Read):
    id: int
    name: str
    description: str
    version: int
    created_at: datetime


class ProductCreate(Command):
    program_id: Id
    name: Name
    parent_id: Id | None = None
    part_number: Line = ""
    mass_kg: Num | None = Field(default=None, gt=0)
    description: Text = ""


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
    program_id: Id
    name: Name
    duration_s: Num = Field(gt=0, description="Duration of one occurrence [s]")
    occurrences: Int = Field(default=1, ge=1)
    position: Int = 0
    description: Text = ""


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
    product_id: Id
    phase_id: Id | None = None
    name: Name
    kind: EnvironmentKind
    axis: Axis
    source: Line = ""
    provenance: Text = ""
    #: The data of the first revision; its form depends on `kind` (see RevisionIn).
    data: dict[str, Any]
    note: Text = ""


class RevisionIn(Command):
    """A new revision: the whole data (revisions are complete, never partial edits).

    random: ``{"freq_hz": [...], "asd_g2_hz": [...]}``; optional ``duration_s`` (one
    exposure; default the phase's occurrence duration).
    shock: ``{"freq_hz": [...], "accel_g": [...], "q": 10}``; optional ``count``.
    sine: ``{"bands": [{"f_lo_hz", "f_hi_hz", "quantity", "amplitude", "unit", "measure"}],
    "sweep": {"rate_oct_per_min" | "rate_hz_per_s", "direction", "sweeps"}}``; a band's
    ``unit`` defaults to mm for a displacement (``measure`` peak or peak_to_peak), m/s for a
    velocity and g for an acceleration; consecutive bands must meet (same peak acceleration
    at the shared edge, within 10 %); stored amplitudes are in m, m/s and g.
    time_history: ``{"dt_s": ..., "accel_g": [...]}`` (long records go in as files).
    """

    data: dict[str, Any]
    note: Text = ""
    expected_revision: Int | None = Field(
        default=None, description="Number of the revision this one replaces (concurrency)"
    )


class FileReading(Command):
    """How to read an uploaded file: units of its values and what a record needs."""

    value_units: str | None = None
    freq_units: str = "Hz"
    sample_rate_hz: float | None = Field(default=None, gt=0)
    calibration: float | None = Field(default=None, gt=0)
    variable: str | None = None
    #: The environment's part of its phase, stored with the data (docs/methods/exposure.md):
    #: a fraction of the phase's time (random, sine, record), its own duration per
    #: occurrence [s] (random, record), or the shock events per occurrence. Checked as
    #: the data's fields (``data.share``, ``data.duration_s``, ``data.count``).
    share: float | None = None
    duration_s: float | None = None
    count: int | None = None


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
    #: "withdrawn by NAME on DATE: REASON" when the environment was withdrawn.
    withdrawn: str | None = None
    #: Cautions about the life cycle it enters, e.g. a phase whose time it and another
    #: environment together count more than once.
    warnings: list[str] = []


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


class Rule(BaseModel):
    """A part of a margin policy: unknown keys and non-finite numbers are refused."""

    model_config = ConfigDict(extra="forbid")


class RandomRule(Rule):
    margin_db: Num = Field(description="Added to the limit level [dB]")
    duration_s: Num | None = Field(
        default=None, gt=0, description="Fixed test duration per axis [s]"
    )
    duration_factor: Num | None = Field(
        default=None, gt=0, description="Test duration = factor x life exposure"
    )
    compression_exponent: Num | None = Field(
        default=None, gt=0, description="Inverse-power-law exponent m in g rms (time compression)"
    )
    minimum_profile: dict[str, list[Num]] | None = Field(
        default=None, description="Floor PSD {freq_hz, asd_g2_hz} the level may not go below"
    )
    tolerance_db: Num = Field(default=3.0, gt=0, description="+/- band on the ASD [dB]")
    grms_tolerance_pct: Num = Field(default=10.0, gt=0, description="+/- on overall g rms [%]")
    duration_tolerance_pct: Num = Field(
        default=10.0, ge=0, description="Shortest accepted duration, -x % [%]"
    )
    basis: Text = ""

    @model_validator(mode="after")
    def _profile(self):
        p = self.minimum_profile
        if p is not None:
            if sorted(p) != ["asd_g2_hz", "freq_hz"]:
                raise ValueError(f"minimum_profile must have exactly the keys freq_hz and "
                                 f"asd_g2_hz, not {sorted(p)}")
            from qualplan.dynamics.errors import InputError
            from qualplan.dynamics.psd import check_psd

            try:
                check_psd(p["freq_hz"], p["asd_g2_hz"])
            except InputError as exc:
                raise ValueError(f"minimum_profile.{exc}") from exc
        return self


class SineRule(Rule):
    factor: Num = Field(gt=0, description="Multiplier on the limit amplitude")
    sweep_rate_oct_per_min: Num = Field(gt=0)
    direction: Literal["up", "down", "up-down"] = "up"
    sweeps: Int = Field(default=1, ge=1)
    tolerance_pct: Num = Field(default=10.0, gt=0, description="+/- on amplitude [%]")
    basis: Text = ""


class ShockRule(Rule):
    margin_db: Num = Field(description="Added to the SRS [dB]")
    shocks_per_direction: Int = Field(ge=1, description="Shocks in each loaded direction")
    directions: Literal["one", "both"] = Field(
        default="one", description="Shock along one direction of each axis, or both (+ and -)"
    )
    lower_db: Num = Field(default=-6.0, lt=0, description="Lower tolerance band [dB]")
    upper_db: Num = Field(default=6.0, gt=0, description="Upper tolerance band [dB]")
    outer_lower_db: Num | None = Field(
        default=None, lt=0, description="Outer band for the points allowed outside"
    )
    outer_upper_db: Num | None = Field(default=None, gt=0)
    min_share_within_band: Num = Field(
        default=1.0, gt=0, le=1, description="Share of points inside the band"
    )
    min_fraction_above_nominal: Num = Field(default=0.5, ge=0, le=1)
    q: Num = Field(default=10.0, gt=0.5)
    basis: Text = ""

    @model_validator(mode="after")
    def _bands(self):
        if self.outer_lower_db is not None and self.outer_lower_db > self.lower_db:
            raise ValueError(f"outer_lower_db = {self.outer_lower_db:g} must not lie inside "
                             f"the band (lower_db = {self.lower_db:g})")
        if self.outer_upper_db is not None and self.outer_upper_db < self.upper_db:
            raise ValueError(f"outer_upper_db = {self.outer_upper_db:g} must not lie inside "
                             f"the band (upper_db = {self.upper_db:g})")
        return self


class AnalysisRule(Rule):
    margin_db: Num = Field(default=0.0, description="Analysis margin on the limit level [dB]")
    basis: Text = ""


class EquivalenceRule(Rule):
    q: Num = Field(default=10.0, gt=0.5)
    b: list[Annotated[Num, Field(gt=0, le=50)]] = Field(default=[8.0], min_length=1)
    f_lo_hz: Num = Field(default=20.0, gt=0)
    f_hi_hz: Num = Field(default=2000.0, gt=0)
    points_per_octave: Int = Field(default=6, ge=1, le=48)
    fds_margin_db: Num = Field(default=0.0, description="Required test/life FDS ratio [dB]")
    ers_margin_db: Num = Field(default=0.0, description="Required test/life ERS ratio [dB]")
    overtest_limit_db: Num = Field(
        default=6.0, gt=0, description="Test ERS above life ERS flagged beyond this [dB]"
    )
    coverage_required: dict[Grade, bool] = Field(
        default_factory=lambda: {Grade.qualification: True, Grade.protoflight: True,
                                 Grade.acceptance: False},
        description="Per grade: is a test requirement verified only when the test "
        "sequence of its axis covers the life (FDS and ERS)?",
    )
    basis: Text = ""

    @model_validator(mode="after")
    def _band(self):
        if self.f_hi_hz <= self.f_lo_hz:
            raise ValueError(f"f_hi_hz = {self.f_hi_hz:g} must exceed f_lo_hz = "
                             f"{self.f_lo_hz:g}")
        return self


class ControlRule(Rule):
    """What a random vibration controller can follow (common practice; a lab's own
    controller and fixture may allow more or less)."""

    max_slope_db_per_oct: Num = Field(
        default=24.0, gt=0, le=200, description="Steepest slope between breakpoints [dB/oct]")
    max_dynamic_range_db: Num = Field(
        default=40.0, gt=0, le=200,
        description="Highest over lowest ASD of a random test level [dB]")
    floor_g2_hz: Num = Field(
        default=1e-6, gt=0, description="No breakpoint of a random test level below [g^2/Hz]")
    max_notch_db: Num = Field(
        default=10.0, gt=0, le=60,
        description="Deepest response-limit or force-limit notch without an approver's "
        "acceptance [dB] (common practice)")
    basis: Text = "common practice"


#: The longest waiver any policy may allow [days] (ten years with their leap days).
WAIVER_DAYS_LIMIT = 3653


class ApprovalRule(Rule):
    """Waivers: how long one may run, and where two persons must be involved."""

    max_waiver_days: Int = Field(default=365, ge=1, le=WAIVER_DAYS_LIMIT,
                                 description="Longest a waiver may run [days]")
    two_person: dict[Grade, bool] = Field(
        default={Grade.qualification: True, Grade.acceptance: False,
                 Grade.protoflight: False},
        description="Per grade: the approver who waives is not the evidence's author nor "
        "the requester")
    basis: Text = ""


class PolicyRules(BaseModel):
    model_config = ConfigDict(extra="forbid")
    random: dict[Grade, RandomRule]
    sine: dict[Grade, SineRule]
    shock: dict[Grade, ShockRule]
    analysis: AnalysisRule = AnalysisRule()
    equivalence: EquivalenceRule = EquivalenceRule()
    control: ControlRule = ControlRule()
    approvals: ApprovalRule = ApprovalRule()


class PolicyRead(Read):
    id: int
    name: str
    description: str
    basis: str
    rules: PolicyRules
    copied_from_id: int | None
    version: int


class PolicyCopy(Command):
    name: Name
    description: Text | None = None


class PolicyUpdate(Command):
    rules: PolicyRules
    description: Text | None = None


class PolicyConfirm(Command):
    """An approver's confirmation that the policy's values match the issue in force."""

    issue: str = Field(description="The issue of the standard checked against, one line")
    note: str = ""


class PolicyConfirmationRead(Read):
    id: int
    policy_id: int
    policy_version: int
    issue: str
    confirmed_by: str
    note: str
    created_at: datetime


# --- levels ---------------------------------------------------------------------------


class RecordAnalysis(Command):
    """Welch / maximax settings for the records of a derivation; None: the default.

    Defaults: resolution = lowest natural frequency of interest / 4 (at least 4 lines
    below it), Hann window, 50 % overlap, maximax window max(1 s, 4 segments)."""

    window: Literal["hann", "hamming", "boxcar", "blackman", "flattop"] = "hann"
    resolution_hz: Num | None = Field(default=None, gt=0, description="Line spacing [Hz]")
    segment_s: Num | None = Field(default=None, gt=0, description="Segment length [s]")
    overlap: Num = Field(default=0.5, ge=0, lt=1, description="Segment overlap [fraction]")
    maximax_window_s: Num | None = Field(
        default=None, gt=0, description="Length of each maximax window [s]")

    @model_validator(mode="after")
    def _one_of(self):
        if self.resolution_hz is not None and self.segment_s is not None:
            raise ValueError("give resolution_hz or segment_s, not both")
        return self


class LevelRecipe(Command):
    product_id: Id
    name: Name
    purpose: LevelPurpose = LevelPurpose.test
    grade: Grade = Grade.qualification
    kind: Literal["random", "sine", "shock"]
    axis: Axis
    revision_ids: list[Id] = Field(min_length=1)
    #: envelope: maximum envelope; p95_50: normal tolerance limit of measured spectra;
    #: fds_equivalent (random test levels): the PSD that in the test duration does the
    #: fatigue damage of the chosen environments (any kinds) over their exposures.
    combination: Literal["envelope", "p95_50", "fds_equivalent"] = "envelope"
    max_breakpoints: Int = Field(default=12, ge=2, le=200)
    policy_id: Id
    #: Natural frequency and Q for the equivalent-static load factor (analysis).
    load_factor_fn_hz: Num | None = Field(default=None, gt=0)
    load_factor_q: Num = Field(default=10.0, gt=0.5)
    #: How records are analysed into PSDs (defaults resolve the policy band's lower edge).
    analysis: RecordAnalysis = Field(default_factory=lambda: RecordAnalysis())


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
    #: "withdrawn by NAME on DATE: REASON" when the level was withdrawn.
    withdrawn: str | None = None
    superseded_by_id: int | None = None


class DifferenceRow(BaseModel):
    """One breakpoint of the old or the new level: both values and new/old in dB."""

    freq_hz: float
    old: float | None
    new: float | None
    #: 10 log10 (PSD) or 20 log10 (g) of new/old; None outside the common band.
    db: float | None


class InputChange(BaseModel):
    environment: str
    old_revision: int
    new_revision: int


class LevelDifference(BaseModel):
    """What a re-derivation changes, shown before the new level is stored."""

    level_id: int
    name: str
    old_number: int
    new_number: int
    kind: str
    #: Unit of the breakpoint values ("g^2/Hz" or "g").
    unit: str
    rows: list[DifferenceRow]
    overall_quantity: str
    overall_unit: str
    overall_old: float
    overall_new: float
    overall_db: float
    max_abs_db: float | None
    inputs: list[InputChange]
    stored: bool = False
    new_level_id: int | None = None


class WithdrawIn(Command):
    reason: Text = Field(min_length=10, description="Why it is withdrawn (kept in history)")


class WithdrawalRead(Read):
    id: int
    environment_id: int | None
    level_id: int | None
    reason: str
    actor: str
    created_at: datetime


# --- requirements, evidence, waivers --------------------------------------------------


class RequirementCreate(Command):
    program_id: Id
    key: Key
    text: Text = Field(min_length=1)
    product_id: Id
    level_id: Id | None = None
    method: VerificationMethod
    acceptance_criterion: Text = ""
    required_margin: Num = 0.0


class RequirementUpdate(Command):
    text: Text | None = None
    level_id: Id | None = None
    method: VerificationMethod | None = None
    acceptance_criterion: Text | None = None
    required_margin: Num | None = None
    expected_version: Int = Field(description="The version the edit was made from")


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
    applied: Num = Field(description="Applied (computed) value, in `units`")
    allowable: Num = Field(description="Allowable value, in `units`")
    units: Key
    factor_of_safety: Num = Field(default=1.0, gt=0)
    note: Text = ""


class TestEvidenceIn(Command):
    """An achieved test record, as arrays (a file reader turns uploads into this)."""

    freq_hz: list[Num] = Field(min_length=2)
    values: list[Num] = Field(
        min_length=2, description="g^2/Hz (random), g SRS (shock) or g peak (sine)"
    )
    duration_s: Num | None = Field(default=None, gt=0)
    shocks: Int | None = Field(default=None, ge=0)
    note: Text = ""


class SimilarityEvidenceIn(Command):
    similar_requirement_id: Id
    rationale: Text = Field(min_length=10)


class InspectionEvidenceIn(Command):
    passed: bool = Field(strict=True)
    note: Text = Field(min_length=3)


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
    rationale: Text = Field(min_length=10)
    expires_at: datetime
    #: The waiver request answered (default: the newest unanswered one, if any).
    request_id: Id | None = None


class WaiverRequestIn(Command):
    reason: Text = Field(min_length=10)


class WaiverRequestRead(Read):
    id: int
    requirement_id: int
    requested_by: str
    reason: str
    created_at: datetime


class WaiverRead(Read):
    id: int
    requirement_id: int
    approver: str
    rationale: str
    expires_at: datetime
    created_at: datetime
    revoked_at: datetime | None
    request_id: int | None = None
    without_evidence: bool = False


# --- audit ----------------------------------------------------------------------------


class AuditItem(BaseModel):
    key: str
    requirement_id: int
    product: str
    level: str | None
    method: VerificationMethod
    status: Status
    reason: str
    #: Required margin: MS (unitless) for analysis, dB over the limit level for tests.
    required_margin: float
    #: The figure compared with the required margin: analysis MS, or the achieved test
    #: record over the limit level [dB] with the time compression excluded.
    achieved_margin: float | None
    #: Unit of the margins: "MS" (margin of safety) for analysis, "dB" for tests.
    margin_unit: str = ""
    shortfall: float | None
    evidence_id: int | None
    #: The margins split by cause (planning.margins.Margins as a dict).
    margins: dict = {}


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
    name: Key
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


# --- program memberships --------------------------------------------------------------


class ProgramRole(enum.StrEnum):
    """A role held in one program (admin is global, never a program role)."""

    viewer = "viewer"
    engineer = "engineer"
    approver = "approver"


class MemberGrant(Command):
    role: ProgramRole


class MemberRead(BaseModel):
    user: str
    role: ProgramRole
