"""Issued documents: the content of a test-level specification and of a margin-closure
audit report, built from the database, and the use case that issues them.

The content types are plain, frozen data (pydantic models): the reports layer renders
them (PDF, CSV, JSON) without touching the database, so nothing is typed twice and the
same database state always gives the same content. Dates come from the database (the
levels' and documents' own timestamps), never from the wall clock.

A document has a number (e.g. ``TLS-TRN-PEU-200-Q``) and revisions. Issuing content
whose hash equals the latest revision's re-renders that revision; any change of the
content makes the next revision, and the revision history lists them all.
"""

from __future__ import annotations

import re
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Literal, Protocol

from pydantic import BaseModel, ConfigDict
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from qualplan.planning import coverage, evidence, margins, wording
from qualplan.planning import results as res
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require_in
from qualplan.planning.audit import audit
from qualplan.planning.catalog import get
from qualplan.planning.coverage import AXIS_ORDER, KIND_ORDER, specification_order
from qualplan.planning.errors import Conflict, NotFound, ValidationFailed
from qualplan.planning.inputs import check_document_number
from qualplan.planning.levels import read_level, result_of
from qualplan.planning.lifecycle import current_test_levels
from qualplan.planning.notching import level_notching, notch_table_rows
from qualplan.planning.policies import basis_statement
from qualplan.planning.transfers import level_force_limit
from qualplan.store import models as m
from qualplan.store.hashing import json_hash
from qualplan.store.repositories import RevisionRepository

GRADE_CODE = {"qualification": "Q", "acceptance": "A", "protoflight": "P"}


class Content(BaseModel):
    model_config = ConfigDict(frozen=True)


# --- specification ----------------------------------------------------------------------


class RandomRow(Content):
    freq_hz: float
    asd_g2_hz: float
    #: Slope of the segment from this breakpoint to the next [dB/oct]; None on the last.
    slope_db_per_oct: float | None


class RandomTable(Content):
    rows: list[RandomRow]
    grms: float
    duration_s: float
    tolerance_db: float
    grms_tolerance_pct: float
    duration_tolerance_pct: float
    velocity_rms_m_s: float | None = None
    displacement_pk_pk_m: float | None = None


class SineBandRow(Content):
    f_lo_hz: float
    f_hi_hz: float
    quantity: str
    #: Amplitude in `unit` (displacement in mm, velocity in m/s, acceleration in g).
    amplitude: float
    unit: str


class SineCrossover(Content):
    between: str
    freq_hz: float


class SinePoint(Content):
    freq_hz: float
    accel_g: float


class SineTable(Content):
    bands: list[SineBandRow]
    crossovers: list[SineCrossover]
    points: list[SinePoint]
    peak_accel_g: float
    sweep_rate_oct_per_min: float
    direction: str
    sweeps: int
    sweep_time_s: float
    tolerance_pct: float


class ShockRow(Content):
    freq_hz: float
    accel_g: float
    slope_db_per_oct: float | None


class ShockTable(Content):
    rows: list[ShockRow]
    q: float
    lower_db: float
    upper_db: float
    min_fraction_above_nominal: float
    shocks_per_direction: int
    directions: str
    shocks_per_axis: int


class InputRow(Content):
    environment: str
    kind: str
    axis: str
    phase: str
    source: str
    revision: int
    latest_revision: int
    content_hash: str


class StepRow(Content):
    step: str
    detail: str


class FdsCoverage(Content):
    b: str
    ratio_db: list[float | None]
    required_db: float
    worst_fn_hz: float | None
    worst_db: float | None
    passed: bool


class ErsCoverage(Content):
    ratio_db: list[float | None]
    required_db: float
    worst_fn_hz: float | None
    worst_db: float | None
    passed: bool
    overtest_limit_db: float
    max_overtest_db: float | None
    max_overtest_fn_hz: float | None


class CoverageData(Content):
    fn_hz: list[float]
    q: float | None
    life: list[str]
    fds: list[FdsCoverage]
    ers: ErsCoverage | None
    passed: bool
    notes: list[str]


class Curve(Content):
    freq_hz: list[float]
    values: list[float]


class Derivation(Content):
    inputs: list[InputRow]
    combination: str
    steps: list[StepRow]
    #: The limit level (envelope or P95/50 before margins), for the envelope plot.
    limit: Curve | None
    coverage: CoverageData | None


class ForceLimitRow(Content):
    freq_hz: float
    fsd_n2_hz: float


class ForceLimitNotch(Content):
    f_lo_hz: float
    f_hi_hz: float
    f_deepest_hz: float
    depth_db: float
    width_oct: float
    exceeds_policy: bool


class ForceLimitTable(Content):
    """The force limit of a random level (NASA-HDBK-7004 semi-empirical) [N^2/Hz]."""

    method: str
    c2: float
    mass_kg: float
    f0_hz: float
    rolloff_db_per_oct: float
    force_rms_n: float
    rows: list[ForceLimitRow]
    notches: list[ForceLimitNotch]
    max_notch_db: float | None
    needs_acceptance: bool
    accepted_by: str | None = None
    acceptance_rationale: str = ""
    #: The input ASD notched by the force limit at the predicted notches [Hz], [g^2/Hz]
    #: (empty when no modes were given), for the level chart.
    notched_freq_hz: list[float] = []
    notched_asd_g2_hz: list[float] = []


class NotchingPoint(Content):
    freq_hz: float
    level: float
    notched: float


class NotchingTable(Content):
    """Response-limit notching of a random or sine level (planning.notching)."""

    notching_id: int
    method: str
    location: str
    limit: str
    value_unit: str
    transmissibility_source: str
    transmissibility_note: str
    max_notch_db: float | None
    notches: list[ForceLimitNotch]
    #: The notched input where it differs from the level (thinned; the CSV has all).
    points: list[NotchingPoint]
    #: Every point of the notched input (for the CSV).
    freq_hz: list[float]
    original: list[float]
    notched: list[float]
    grms_before: float | None
    grms_after: float | None
    needs_acceptance: bool
    accepted_by: str | None = None
    acceptance_rationale: str = ""
    author: str


class LevelSection(Content):
    level_id: int
    name: str
    number: int
    kind: Literal["random", "sine", "shock"]
    axis: str
    level_hash: str
    derived_at: datetime
    author: str
    policy: str
    stale_reasons: list[str]
    #: The level's verdicts as planning decided them when it was derived.
    verdicts: res.Verdicts
    random: RandomTable | None = None
    sine: SineTable | None = None
    shock: ShockTable | None = None
    force_limit: ForceLimitTable | None = None
    notching: NotchingTable | None = None
    derivation: Derivation


class HistoryRow(Content):
    revision: int
    date: datetime
    content_hash: str
    note: str


class ProductInfo(Content):
    id: int
    name: str
    part_number: str
    mass_kg: float | None
    parents: list[str]


class PolicyInfo(Content):
    name: str
    basis: str


class AxisCoverage(Content):
    """Coverage of one axis's life by all the test levels of the document on that axis."""

    axis: str
    tests: list[str]
    coverage: CoverageData | None


class ApprovalRow(Content):
    """One role of the approval block: who signed, when (None: unsigned)."""

    role: str
    name: str | None = None
    signed_at: datetime | None = None


class SpecificationContent(Content):
    kind: Literal["specification"] = "specification"
    number: str
    revision: int
    title: str
    date: datetime
    program: str
    program_id: int
    product: ProductInfo
    grade: str
    policies: list[PolicyInfo]
    prepared_by: list[str]
    sections: list[LevelSection]
    axes: list[AxisCoverage] = []
    warnings: list[str]
    history: list[HistoryRow]
    input_hashes: dict[str, Any]
    #: A preview: not issued, no revision number; may show stale levels, marked.
    preview: bool = False
    #: Sign-off of the issued revision (prepared, checked, approved), not in the hash.
    approvals: list[ApprovalRow] = []

    @property
    def product_id(self) -> int:
        return self.product.id

    def content_hash(self) -> str:
        return content_hash(self)


# --- audit ------------------------------------------------------------------------------


class AuditRow(Content):
    key: str
    product: str
    level: str | None
    method: str
    required_margin: float
    achieved_margin: float | None
    #: Unit of both margins: "MS" (analysis margin of safety), "dB" (test) or "".
    margin_unit: str
    status: str
    evidence: str
    reason: str
    #: The margins split by cause, as the texts of ``margins.COLUMNS``.
    margin_cells: list[str] = []


class AuditContent(Content):
    kind: Literal["audit"] = "audit"
    number: str
    revision: int
    title: str
    date: datetime
    program: str
    scope: str
    program_id: int
    #: The audited product (with its children); None for the whole program.
    product_id: int | None
    counts: dict[str, int]
    items: list[AuditRow]
    #: Headers of ``AuditRow.margin_cells``, each naming its unit.
    margin_columns: list[str] = list(margins.COLUMNS)
    blocking: list[AuditRow]
    release_ready: bool
    verdict: str
    #: The test record behind each test requirement's status, with its level and the
    #: tolerance band its verdict used (for the record-against-level plots).
    records: list[evidence.RecordOverlay] = []
    history: list[HistoryRow]
    input_hashes: dict[str, Any]
    preview: bool = False
    approvals: list[ApprovalRow] = []

    def content_hash(self) -> str:
        return content_hash(self)


DocumentContent = SpecificationContent | AuditContent


def content_hash(content: DocumentContent) -> str:
    """SHA-256 of what the document shows, without its revision, history, preview mark
    and sign-off (signing a revision does not change it)."""
    exclude = {"revision", "history", "preview", "approvals"}
    if not getattr(content, "records", None):
        exclude.add("records")  # audits without test records hash as they did before
    return json_hash(content.model_dump(mode="json", exclude=exclude))


class DocumentRenderer(Protocol):
    """Turns content into files (PDF, CSV, JSON) in a folder; returns their paths."""

    def render(self, content: DocumentContent, out_dir: Path) -> list[Path]: ...


class IssuedDocument(BaseModel):
    document_id: int
    number: str
    revision: int
    content_hash: str
    new_revision: bool
    files: list[Path]


# --- helpers ----------------------------------------------------------------------------


def _slug(text: str) -> str:
    return re.sub(r"[^A-Z0-9]+", "-", text.upper()).strip("-") or "X"


def _step(item: res.Step, level: m.Level) -> StepRow:
    """The step in words (planning.wording, as the web and the CLI print it), with its
    basis beside it."""
    policy = level.policy.name if level.policy else None
    grade = level.grade.value if level.grade else None
    return StepRow(step=wording.step_sentence(item, grade=grade, policy=policy),
                   detail=item.basis or "")


def _slopes(values: list[float] | None, n: int) -> list[float | None]:
    vals = list(values or [])
    return [float(vals[i]) if i < len(vals) and vals[i] is not None else None for i in range(n - 1)]


def _history(session: Session, number: str) -> list[m.Document]:
    return list(
        session.scalars(
            select(m.Document).where(m.Document.number == number).order_by(m.Document.revision)
        )
    )


def _approvals(session: Session, document_id: int | None) -> list[ApprovalRow]:
    from qualplan.planning.approvals import SIGNOFF_ORDER, signoffs

    done = {x.role: x for x in signoffs(session, document_id)} if document_id else {}
    return [ApprovalRow(role=r.value, name=done[r].user_name if r in done else None,
                        signed_at=done[r].signed_at if r in done else None)
            for r in SIGNOFF_ORDER]


def _with_revision(session: Session, number: str, body: dict[str, Any], cls, note: str,
                   preview: bool = False):
    """Set revision and history: the latest revision if its hash matches, else the next.
    A preview has neither (revision 0, no history) and no sign-off."""
    if preview:
        return cls(**body, revision=0, history=[], preview=True, approvals=_approvals(session,
                                                                                       None))
    rows = _history(session, number)
    draft = cls(**body, revision=0, history=[])
    h = content_hash(draft)
    history = [HistoryRow(revision=r.revision, date=r.created_at, content_hash=r.content_hash,
                          note=r.note) for r in rows]
    if rows and rows[-1].content_hash == h:
        return cls(**body, revision=rows[-1].revision, history=history,
                   approvals=_approvals(session, rows[-1].id))
    revision = rows[-1].revision + 1 if rows else 1
    history.append(
        HistoryRow(revision=revision, date=body["date"], content_hash=h,
                   note=note or ("first issue" if revision == 1 else "re-issue"))
    )
    return cls(**body, revision=revision, history=history, approvals=_approvals(session, None))


# --- specification content --------------------------------------------------------------


def _random_table(r: res.RandomResult) -> RandomTable:
    f, a = r.freq_hz, r.asd_g2_hz
    slopes = _slopes(r.slopes_db_per_oct, len(f))
    return RandomTable(
        rows=[RandomRow(freq_hz=f[i], asd_g2_hz=a[i],
                        slope_db_per_oct=slopes[i] if i < len(slopes) else None)
              for i in range(len(f))],
        grms=r.grms,
        duration_s=r.duration_s,
        tolerance_db=r.tolerance_db,
        grms_tolerance_pct=r.grms_tolerance_pct,
        duration_tolerance_pct=r.duration_tolerance_pct,
        velocity_rms_m_s=r.shaker.velocity_rms_m_s if r.shaker else None,
        displacement_pk_pk_m=r.shaker.displacement_pk_pk_m if r.shaker else None,
    )


_SINE_UNITS = {"displacement": "mm", "velocity": "m/s", "acceleration": "g"}


def _sine_table(r: res.SineResult) -> SineTable:
    from qualplan.dynamics.sine import crossover_hz

    bands, crossovers = [], []
    raw = r.bands or []
    for b in raw:
        amp = float(b.amplitude)
        label = b.quantity
        if b.quantity == "displacement":
            amp *= 1000.0
            label = "displacement " + ("peak-to-peak" if b.measure == "peak_to_peak"
                                       else "peak")
        bands.append(SineBandRow(f_lo_hz=b.f_lo_hz, f_hi_hz=b.f_hi_hz, quantity=label,
                                 amplitude=amp, unit=_SINE_UNITS[b.quantity]))

    def peak(band: res.SineBand) -> float:
        return band.amplitude / 2 if band.measure == "peak_to_peak" else band.amplitude

    for a, b in zip(raw, raw[1:], strict=False):
        if a.quantity == b.quantity:
            continue
        crossovers.append(SineCrossover(
            between=f"{a.quantity} / {b.quantity}",
            freq_hz=crossover_hz(a.quantity, peak(a), b.quantity, peak(b))))
    return SineTable(
        bands=bands,
        crossovers=crossovers,
        points=[SinePoint(freq_hz=f, accel_g=g)
                for f, g in zip(r.freq_hz, r.accel_g, strict=True)],
        peak_accel_g=r.peak_accel_g,
        sweep_rate_oct_per_min=r.sweep_rate_oct_per_min,
        direction=r.direction,
        sweeps=r.sweeps,
        sweep_time_s=r.sweep_time_s,
        tolerance_pct=r.tolerance_pct,
    )


def _shock_table(r: res.ShockResult) -> ShockTable:
    f, a = r.freq_hz, r.accel_g
    slopes = _slopes(r.slopes_db_per_oct, len(f))
    return ShockTable(
        rows=[ShockRow(freq_hz=f[i], accel_g=a[i],
                       slope_db_per_oct=slopes[i] if i < len(slopes) else None)
              for i in range(len(f))],
        q=r.q,
        lower_db=r.lower_db,
        upper_db=r.upper_db,
        min_fraction_above_nominal=r.min_fraction_above_nominal,
        shocks_per_direction=r.shocks_per_direction,
        directions=r.directions,
        shocks_per_axis=r.shocks_per_axis,
    )


def _coverage(cov: res.Coverage | None) -> CoverageData | None:
    if cov is None:
        return None
    fds = [
        FdsCoverage(b=b, ratio_db=item.fds_ratio_db, required_db=item.required_db,
                    worst_fn_hz=item.worst_fn_hz, worst_db=item.worst_db, passed=item.passed)
        for b, item in cov.by_b.items()
    ]
    e = cov.ers
    ers = None
    if e is not None:
        ers = ErsCoverage(ratio_db=e.ers_ratio_db, required_db=e.required_db,
                          worst_fn_hz=e.worst_fn_hz, worst_db=e.worst_db, passed=e.passed,
                          overtest_limit_db=e.overtest_limit_db,
                          max_overtest_db=e.max_overtest_db,
                          max_overtest_fn_hz=e.max_overtest_fn_hz)
    return CoverageData(fn_hz=cov.fn_hz, q=cov.q, life=cov.life, fds=fds, ers=ers,
                        passed=cov.passed, notes=cov.notes)


def _inputs(session: Session, level: m.Level) -> list[InputRow]:
    revs = RevisionRepository(session)
    out = []
    for rid in level.recipe.get("revision_ids", []):
        rev = revs.get(int(rid))
        if rev is None:
            continue
        env = rev.environment
        latest = revs.latest(env.id)
        out.append(InputRow(
            environment=env.name, kind=env.kind.value, axis=env.axis.value,
            phase=env.phase.name if env.phase else "-", source=env.source or "-",
            revision=rev.number, latest_revision=latest.number if latest else rev.number,
            content_hash=rev.content_hash))
    return out


def _force_limit(session: Session, level: m.Level) -> ForceLimitTable | None:
    fl = level_force_limit(session, level.id)
    if fl is None:
        return None
    row = session.scalar(select(m.LevelForceLimit).where(m.LevelForceLimit.level_id == level.id)
                         .order_by(m.LevelForceLimit.id.desc()).limit(1))
    return ForceLimitTable(
        method=fl.method, c2=fl.c2, mass_kg=fl.mass_kg, f0_hz=fl.f0_hz,
        rolloff_db_per_oct=fl.rolloff_db_per_oct, force_rms_n=fl.force_rms_n,
        rows=[ForceLimitRow(freq_hz=f, fsd_n2_hz=v) for f, v in zip(fl.freq_hz, fl.fsd_n2_hz,
                                                                    strict=True)],
        notches=[ForceLimitNotch(**n.model_dump()) for n in fl.notches],
        max_notch_db=row.params.get("max_notch_db"), needs_acceptance=fl.needs_acceptance,
        accepted_by=fl.accepted_by, acceptance_rationale=fl.acceptance_rationale,
        notched_freq_hz=fl.notched_freq_hz, notched_asd_g2_hz=fl.notched_asd_g2_hz)


def _notching(session: Session, level: m.Level) -> NotchingTable | None:
    n = level_notching(session, level.id)
    if n is None:
        return None
    return NotchingTable(
        notching_id=n.id, method=n.method, location=n.location, limit=n.limit,
        value_unit=n.value_unit, transmissibility_source=n.transmissibility_source,
        transmissibility_note=n.transmissibility_note, max_notch_db=n.max_notch_db,
        notches=[ForceLimitNotch(**x.model_dump()) for x in n.notches],
        points=[NotchingPoint(freq_hz=f, level=a, notched=b) for f, a, b in notch_table_rows(n)],
        freq_hz=n.freq_hz, original=n.original, notched=n.notched, grms_before=n.grms_before,
        grms_after=n.grms_after, needs_acceptance=n.needs_acceptance,
        accepted_by=n.accepted_by, acceptance_rationale=n.acceptance_rationale,
        author=n.author)


def _section(session: Session, level: m.Level) -> LevelSection:
    read = read_level(session, level)
    r = read.result
    kind = r.kind
    limit = r.limit
    values = limit.asd_g2_hz if isinstance(limit, res.RandomLimit) else limit.accel_g
    derivation = Derivation(
        inputs=_inputs(session, level),
        combination=level.recipe.get("combination", "envelope"),
        steps=[_step(x, level) for x in r.steps],
        limit=Curve(freq_hz=limit.freq_hz, values=values) if values else None,
        coverage=_coverage(r.coverage),
    )
    tables: dict[str, Any] = {}
    if isinstance(r, res.RandomResult):
        tables["random"] = _random_table(r)
    elif isinstance(r, res.SineResult):
        tables["sine"] = _sine_table(r)
    else:
        tables["shock"] = _shock_table(r)
    if kind == "random":
        tables["force_limit"] = _force_limit(session, level)
    if kind in ("random", "sine"):
        tables["notching"] = _notching(session, level)
    return LevelSection(
        level_id=level.id, name=level.name, number=level.number, kind=kind,
        axis=level.axis.value, level_hash=level.level_hash, derived_at=level.created_at,
        author=level.author, policy=level.policy.name if level.policy else "-",
        stale_reasons=read.stale_reasons, verdicts=r.verdicts, derivation=derivation,
        **tables,
    )


class BaselineItem(BaseModel):
    """A current test level and whether the default baseline takes it."""

    level_id: int
    name: str
    number: int
    kind: str
    axis: str
    taken: bool
    #: Why it is left out (stale, not converged); empty when taken.
    reasons: list[str] = []


def _unfit(session: Session, level: m.Level) -> list[str]:
    """Why a level may not be issued: stale reasons and a numeric method that did not
    converge (empty when it may)."""
    reasons = list(read_level(session, level).stale_reasons)
    v = result_of(level).verdicts
    if not v.converged:
        why = "; ".join(x for x in v.reasons if "converge" in x)
        reasons.append("the numeric method did NOT converge" + (f": {why}" if why else ""))
    return reasons


def default_baseline(session: Session, product_id: int, grade: m.Grade | str
                     ) -> list[BaselineItem]:
    """The current (newest, not withdrawn) test levels of a product for a grade; those
    neither stale nor unconverged are taken, the others listed with the reason."""
    grade = m.Grade(grade)
    product = get(session, m.Product, product_id, "product")
    out = []
    for lvl in current_test_levels(session, product.id, grade):
        why = _unfit(session, lvl)
        out.append(BaselineItem(level_id=lvl.id, name=lvl.name, number=lvl.number,
                                kind=lvl.kind.value, axis=lvl.axis.value, taken=not why,
                                reasons=why))
    out.sort(key=lambda x: (AXIS_ORDER[x.axis], KIND_ORDER[x.kind], x.name))
    return out


def document_levels(session: Session, document_id: int) -> list[int]:
    """The level ids a specification revision issued (its stored selection)."""
    rows = session.scalars(select(m.DocumentLevel).where(
        m.DocumentLevel.document_id == document_id).order_by(m.DocumentLevel.position))
    return [r.level_id for r in rows]
class LevelExport(Content):
    """One level as its breakpoint table leaves qualplan outside a document."""

    section: LevelSection
    grade: str | None
    caution: str = wording.CAUTION


def level_export(session: Session, level_id: int) -> LevelExport:
    """The section of level `level_id` (tables, tolerances, stale reasons) and its grade,
    for the web download, the API and ``qualplan level export``."""
    level = get(session, m.Level, level_id, "level")
    return LevelExport(section=_section(session, level),
                       grade=level.grade.value if level.grade else None)


def specification_content(
    session: Session,
    product_id: int,
    grade: m.Grade | str,
    *,
    level_ids: list[int] | None = None,
    number: str | None = None,
    note: str = "",
    preview: bool = False,
) -> SpecificationContent:
    """Content of the test-level specification of a product for one grade.

    The levels are exactly `level_ids` or, without them, the default baseline
    (:func:`default_baseline`: the current, non-withdrawn, non-stale, converged test
    levels of the grade), ordered by axis (X, Y, Z, all) and kind (random, sine,
    shock). A stale or unconverged level is refused, except in a `preview` (which takes
    every current level, carries the reasons in its warnings, and has no revision).
    The date is that of the newest level shown.
    """
    if number is not None:
        check_document_number(number)
    grade = m.Grade(grade)
    product = get(session, m.Product, product_id, "product")
    if level_ids:
        chosen = [get(session, m.Level, i, "level") for i in level_ids]
        for i, lvl in zip(level_ids, chosen, strict=True):
            if lvl.product_id != product.id:
                raise ValidationFailed("level_ids", i, f"is a level of another product than "
                                       f"{product.name!r}")
            if lvl.purpose is not m.LevelPurpose.test:
                raise ValidationFailed("level_ids", i, "is an analysis level, not a test level")
            if not preview and (why := _unfit(session, lvl)):
                raise ValidationFailed(
                    "level_ids", i, f"{lvl.name} #{lvl.number} may not be issued: "
                    + "; ".join(why) + " (a preview may show it)")
    elif preview:
        chosen = current_test_levels(session, product.id, grade)
    else:
        base = default_baseline(session, product.id, grade)
        chosen = [get(session, m.Level, x.level_id, "level") for x in base if x.taken]
        if base and not chosen:
            raise ValidationFailed(
                "grade", grade.value, f"none of the {grade.value} test levels of "
                f"{product.name!r} may be issued: " + "; ".join(
                    f"{x.name} #{x.number}: {', '.join(x.reasons)}" for x in base))
    if not chosen:
        raise ValidationFailed("grade", grade.value,
                               f"product {product.name!r} has no {grade.value} test level")
    chosen.sort(key=specification_order)
    sections = [_section(session, lvl) for lvl in chosen]
    parents, p = [], product
    while p.parent_id is not None:
        p = session.get(m.Product, p.parent_id)
        parents.append(p.name)
    policies = {}
    for lvl in chosen:
        if lvl.policy is not None:
            policies[lvl.policy.name] = PolicyInfo(
                name=lvl.policy.name, basis=basis_statement(session, lvl.policy))
    warnings = [f"{sec.name} #{sec.number} is STALE: {r}" for sec in sections
                for r in sec.stale_reasons]
    warnings += [f"{sec.name} #{sec.number} did NOT converge: {r}" for sec in sections
                 if not sec.verdicts.converged for r in sec.verdicts.reasons]
    warnings += [f"{sec.name} #{sec.number}: a response-limit notch is deeper than "
                 f"{sec.notching.max_notch_db:g} dB and has no approver's acceptance"
                 for sec in sections if sec.notching is not None
                 and sec.notching.needs_acceptance and not sec.notching.accepted_by]
    warnings += [f"{sec.name} #{sec.number}: a notch predicted by the force limit is deeper "
                 f"than {sec.force_limit.max_notch_db:g} dB and has no approver's acceptance"
                 for sec in sections if sec.force_limit is not None
                 and sec.force_limit.needs_acceptance and not sec.force_limit.accepted_by]
    axes = [AxisCoverage(axis=x.axis, tests=x.tests, coverage=_coverage(x.coverage))
            for x in coverage.sequence_by_axis(chosen)]
    number = check_document_number(
        number or f"TLS-{_slug(product.part_number or product.name)}-{GRADE_CODE[grade]}")
    body = {
        "number": number,
        "title": f"{grade.value.capitalize()} test levels: {product.name}",
        "date": max(lvl.created_at for lvl in chosen),
        "program": product.program.name,
        "program_id": product.program_id,
        "product": ProductInfo(id=product.id, name=product.name,
                               part_number=product.part_number, mass_kg=product.mass_kg,
                               parents=parents),
        "grade": grade.value,
        "policies": list(policies.values()),
        "prepared_by": sorted({lvl.author for lvl in chosen}),
        "sections": sections,
        "axes": axes,
        "warnings": warnings,
        "input_hashes": {
            "levels": {str(lvl.id): lvl.level_hash for lvl in chosen},
            "revisions": {k: v for lvl in chosen
                          for k, v in lvl.input_hashes.get("revisions", {}).items()},
        },
    }
    return _with_revision(session, number, body, SpecificationContent, note, preview)


# --- audit content ----------------------------------------------------------------------


def _database_date(session: Session) -> datetime:
    """Time of the newest recorded change other than issuing a document."""
    at = session.scalar(select(func.max(m.Event.at)).where(m.Event.entity != "document"))
    if at is None:
        return datetime(1970, 1, 1, tzinfo=UTC)
    return at if at.tzinfo else at.replace(tzinfo=UTC)


def audit_content(
    session: Session,
    program_id: int,
    product_id: int | None = None,
    *,
    number: str | None = None,
    note: str = "",
    now: datetime | None = None,
    preview: bool = False,
) -> AuditContent:
    """Content of the margin-closure audit report of a program (or a product subtree).

    Statuses come from :func:`qualplan.planning.audit.audit`; waivers are judged at
    `now` (default: the current time, since an expired waiver no longer counts). The
    report's date is that of the newest recorded change in the database.
    """
    if number is not None:
        check_document_number(number)
    report: s.AuditReport = audit(session, program_id, product_id, now=now)
    program = get(session, m.Program, program_id, "program")
    anchor = get(session, m.Product, product_id, "product") if product_id is not None else None
    reqs = {r.id: r for r in session.scalars(
        select(m.Requirement).where(m.Requirement.program_id == program.id))}
    rows, records = [], []
    for item in report.items:
        ev = session.get(m.Evidence, item.evidence_id) if item.evidence_id else None
        shown = "-"
        if ev is not None:
            shown = f"#{ev.id} {ev.kind.value}, {ev.verdict.value}, {ev.created_at:%Y-%m-%d}"
            if (ev.kind is m.EvidenceKind.test and ev.data is not None
                    and ev.level_id is not None):
                records.append(evidence.record_overlay(session, ev.id))
        rows.append(AuditRow(
            key=item.key, product=item.product, level=item.level, method=item.method.value,
            required_margin=item.required_margin, achieved_margin=item.achieved_margin,
            margin_unit=item.margin_unit, status=item.status,
            evidence=shown, reason=item.reason,
            margin_cells=margins.cells(item.margins)))
    hashes = {}
    for item in report.items:
        req = reqs[item.requirement_id]
        hashes[item.key] = {
            "version": req.version,
            "level_hash": req.level.level_hash if req.level else None,
            "evidence": [e.id for e in req.evidence],
            "waivers": [w.id for w in req.waivers],
        }
    slug = _slug(program.name if anchor is None else (anchor.part_number or anchor.name))
    number = check_document_number(number or f"MCA-{slug}")
    body = {
        "number": number,
        "title": f"Margin-closure audit: {report.scope}",
        "date": _database_date(session),
        "program": program.name,
        "scope": report.scope,
        "program_id": program.id,
        "product_id": anchor.id if anchor is not None else None,
        "counts": report.counts,
        "items": rows,
        "blocking": [r for r in rows if r.status in ("failed", "stale", "open")],
        "release_ready": report.release_ready,
        "verdict": report.verdict,
        "records": records,
        "input_hashes": {"requirements": hashes},
    }
    return _with_revision(session, number, body, AuditContent, note, preview)


# --- issuing ----------------------------------------------------------------------------


def issue_document(
    session: Session,
    actor: Actor,
    content: DocumentContent,
    renderer: DocumentRenderer,
    out_dir: Path,
) -> IssuedDocument:
    """Render `content` into `out_dir` and record the issued revision (with an Event).

    Content identical to the latest revision re-renders that revision and records
    nothing new. Content built for another revision than the next (someone issued in
    between) is refused with Conflict.
    """
    get(session, m.Program, content.program_id, "program")
    require_in(session, actor, content.program_id, m.Role.engineer, "issuing a document")
    if getattr(content, "preview", False):  # a loads package has no preview
        raise ValidationFailed("preview", True, f"{content.number} is a preview: a preview "
                               "is not issued; prepare the document without it")
    if isinstance(content, SpecificationContent):
        for sec in content.sections:
            if sec.stale_reasons or not sec.verdicts.converged:
                raise ValidationFailed(
                    "level_ids", sec.level_id, f"{sec.name} #{sec.number} may not be issued: "
                    + "; ".join([*sec.stale_reasons, *(
                        [] if sec.verdicts.converged else ["NOT converged"])]))
    rows = _history(session, content.number)
    h = content_hash(content)
    latest = rows[-1] if rows else None
    same = latest is not None and latest.content_hash == h and latest.revision == content.revision
    expected = (latest.revision + 1) if latest else 1
    if not same and content.revision != expected:
        raise Conflict(f"document {content.number} was prepared as revision "
                       f"{content.revision}, but the next revision is {expected}; prepare it again")
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    files = list(renderer.render(content, out_dir))
    if same:
        doc = latest
    else:
        doc = m.Document(
            program_id=content.program_id,
            product_id=content.product_id,
            kind=m.DocumentKind(content.kind),
            number=content.number,
            revision=content.revision,
            title=content.title,
            content_hash=h,
            input_hashes=content.input_hashes,
            note=content.history[-1].note if content.history else "",
            author=actor.name,
            # The document's date is its content's (from the database), so a re-render
            # of this revision shows the same date; the Event keeps the issue time.
            created_at=content.date,
        )
        session.add(doc)
        session.flush()
        if isinstance(content, SpecificationContent):  # the selection it issues
            for pos, sec in enumerate(content.sections):
                session.add(m.DocumentLevel(document_id=doc.id, level_id=sec.level_id,
                                            position=pos))
            session.flush()
        record(session, actor, "issue", "document", doc.id, number=doc.number,
               revision=doc.revision, content_hash=h, kind=content.kind)
    return IssuedDocument(document_id=doc.id, number=doc.number, revision=doc.revision,
                          content_hash=h, new_revision=not same, files=files)


def document_ref(session: Session, number: str, revision: int | None = None) -> m.Document:
    """An issued document by number and revision (default: its latest revision)."""
    stmt = select(m.Document).where(m.Document.number == number)
    if revision is not None:
        stmt = stmt.where(m.Document.revision == revision)
    doc = session.scalar(stmt.order_by(m.Document.revision.desc()).limit(1))
    if doc is None:
        raise NotFound("document", number if revision is None else f"{number} r{revision}")
    return doc


def approvals_of(session: Session, document_id: int) -> list[ApprovalRow]:
    """The approval block of an issued revision: each role, who signed and when."""
    get(session, m.Document, document_id, "document")
    return _approvals(session, document_id)


def list_documents(session: Session, product_id: int | None = None) -> list[m.Document]:
    stmt = select(m.Document).order_by(m.Document.number, m.Document.revision)
    if product_id is not None:
        stmt = stmt.where(m.Document.product_id == product_id)
    return list(session.scalars(stmt))
