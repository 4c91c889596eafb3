"""Margins split by cause: what is over what, each in its own unit, computed once here.

A release board reads five different things that were once folded into one "achieved
margin" and must stay apart:

- the margin of the test level over the limit level [dB], the time compression excluded
  (a random test compressed from a long life runs above its limit by the compression,
  which buys no margin: it repays the shorter duration, MIL-STD-810H Method 514.8
  Annex A); the compression is its own figure beside it, never added in;
- the same for the achieved test record (achieved g rms, SRS or sine amplitude over the
  limit level, compression excluded) [dB];
- the tolerance verdict of the achieved record (inside the level's band and share);
- the fatigue coverage (FDS test/life, worst natural frequency and its dB, per Basquin
  exponent b) and the peak coverage (ERS test/life) with the over-test ceiling, judged on
  the whole test sequence of the axis and grade (``coverage.program_coverage``);
- the margin of safety of analysis evidence, MS = allowable / (FS x applied) - 1
  (unitless; NASA-STD-5001B section 4.1).

Power dB for a PSD's g rms is 20 log10 of the g rms ratio (10 log10 of the power
ratio); amplitude dB for an SRS or a sine amplitude is 20 log10 of the amplitude ratio.
Interfaces show these fields as they are; none recomputes them.
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from pydantic import BaseModel, Field
from sqlalchemy.orm import Session

from qualplan.planning import coverage as cov
from qualplan.planning import results as r
from qualplan.planning import wording as w
from qualplan.planning.levels import result_of
from qualplan.planning.policies import rules_of
from qualplan.store import models as m

#: What each kind's "over the limit" measures, as the column header says it.
OVER_LIMIT_MEASURE = {
    "random": "g rms over the limit level's g rms, dB (compression excluded)",
    "shock": "SRS over the limit SRS, mean over the points, dB",
    "sine": "sine amplitude over the limit amplitude, minimum over the points, dB",
}

#: Grades whose test requirements must cover the life unless the policy says otherwise
#: (common practice: a qualification or protoflight test proves the design against the
#: life; an acceptance test is a workmanship screen and does not).
DEFAULT_COVERAGE_REQUIRED = {"qualification": True, "protoflight": True, "acceptance": False}


class FatigueMargin(BaseModel):
    """Fatigue coverage for one Basquin exponent: worst FDS test/life [dB] and where."""

    b: str
    worst_db: float | None
    worst_fn_hz: float | None
    required_db: float
    passed: bool


class PeakMargin(BaseModel):
    """Peak coverage: worst ERS test/life [dB], and the largest over-test [dB]."""

    worst_db: float | None
    worst_fn_hz: float | None
    required_db: float
    passed: bool
    overtest_db: float | None
    overtest_fn_hz: float | None
    overtest_limit_db: float
    overtest_passed: bool


class Margins(BaseModel):
    """Every margin of one requirement's evidence, each by its cause and in its unit."""

    #: Test level over its limit level [dB], the time compression excluded.
    level_over_limit_db: float | None = None
    #: Level increase from time compression [dB] (random tests only), never added in.
    compression_db: float | None = None
    #: Achieved test record over the limit level [dB], the time compression excluded.
    achieved_over_limit_db: float | None = None
    #: What the two "over limit" figures measure, in words.
    over_limit_measure: str | None = None
    #: Tolerance verdict of the achieved record: "pass", "fail", or None (no test record).
    tolerance: Literal["pass", "fail"] | None = None
    tolerance_reason: str = ""
    #: Fatigue coverage per b, and peak coverage, of the test sequence of the axis.
    fatigue: list[FatigueMargin] = Field(default_factory=list)
    peak: PeakMargin | None = None
    #: The tests judged together (the sequence of the axis and grade).
    coverage_of: list[str] = Field(default_factory=list)
    #: Does the policy ask that this requirement's level covers the life?
    coverage_required: bool | None = None
    #: Does the sequence cover the life (FDS for every b and ERS)? None when not judged.
    covers_life: bool | None = None
    #: Why it does not, in words ("level does not cover the life: FDS -37.00 dB at ...").
    coverage_reasons: list[str] = Field(default_factory=list)
    #: Margin of safety of analysis evidence (unitless).
    analysis_ms: float | None = None


def coverage_required(rules, grade: m.Grade | None) -> bool:
    """Whether the policy asks a test level of `grade` to cover the life."""
    if grade is None:
        return False
    asked = rules.equivalence.coverage_required
    return bool(asked.get(grade, DEFAULT_COVERAGE_REQUIRED.get(grade.value, True)))


def compression_db(result) -> float | None:
    """Level increase from the time-compression step [dB], or None when there is none."""
    for step in result.steps:
        if step.step == "time compression" and step.db is not None:
            return float(step.db)
    return None


def level_over_limit_db(result) -> float | None:
    """Test level over its limit level [dB], the time compression excluded."""
    if isinstance(result, r.RandomResult):
        if not result.limit.grms > 0:
            return None
        total = 20 * np.log10(result.grms / result.limit.grms)
        return float(total - (compression_db(result) or 0.0))
    lim = np.asarray(result.limit.accel_g, float)
    val = np.exp(np.interp(np.log(result.limit.freq_hz), np.log(result.freq_hz),
                           np.log(result.accel_g)))
    ratio = 20 * np.log10(val / lim)
    return float(np.mean(ratio) if isinstance(result, r.ShockResult) else np.min(ratio))


def achieved_over_limit_db(result, ev: m.Evidence) -> float | None:
    """Achieved record over the limit level [dB], the time compression excluded."""
    if isinstance(result, r.RandomResult):
        grms = (ev.summary.get("achieved_grms") or {}).get("value")
        if grms is None or not result.limit.grms > 0:
            return None
        return float(20 * np.log10(grms / result.limit.grms) - (compression_db(result) or 0.0))
    return ev.achieved_margin  # shock: mean dB over the limit SRS; sine: minimum dB


def _coverage_block(c: r.Coverage, required: bool) -> dict:
    fatigue = [FatigueMargin(b=b, worst_db=x.worst_db, worst_fn_hz=x.worst_fn_hz,
                             required_db=x.required_db, passed=x.passed)
               for b, x in c.by_b.items()]
    peak = None
    if c.ers is not None:
        e = c.ers
        over_ok = e.max_overtest_db is None or e.max_overtest_db <= e.overtest_limit_db
        peak = PeakMargin(worst_db=e.worst_db, worst_fn_hz=e.worst_fn_hz,
                          required_db=e.required_db, passed=e.passed,
                          overtest_db=e.max_overtest_db, overtest_fn_hz=e.max_overtest_fn_hz,
                          overtest_limit_db=e.overtest_limit_db, overtest_passed=over_ok)
    reasons: list[str] = []
    if not c.fn_hz:
        reasons = [f"level coverage of the life not computed: {n}" for n in c.notes] or [
            "level coverage of the life not computed"]
        covers = False
    else:
        for f in fatigue:
            if not f.passed:
                reasons.append(
                    f"level does not cover the life: FDS "
                    f"{w.decibels(f.worst_db, f.required_db)} at "
                    f"{f.worst_fn_hz:.4g} Hz, b = {f.b} (required {f.required_db:+g} dB)")
        if peak is not None and not peak.passed:
            reasons.append(
                f"level does not cover the life: ERS "
                f"{w.decibels(peak.worst_db, peak.required_db)} at "
                f"{peak.worst_fn_hz:.4g} Hz (required {peak.required_db:+g} dB)")
        covers = bool(c.passed)
    return {"fatigue": fatigue, "peak": peak, "coverage_of": list(c.tests),
            "coverage_required": required, "covers_life": covers,
            "coverage_reasons": reasons}


#: Cache within one audit: sequence coverage per (product, axis, grade, policy), and each
#: level's typed result with its two figures per ("level", level id) (levels are
#: append-only, so a level's result cannot change during the audit).
CoverageCache = dict[tuple, object]


def sequence_coverage(session: Session, level: m.Level,
                      cache: CoverageCache | None = None) -> r.Coverage:
    """Coverage of the life of the level's axis by the test sequence of its grade."""
    key = (level.product_id, level.axis.value, level.grade.value, level.policy_id)
    if cache is not None and key in cache:
        return cache[key]
    product = session.get(m.Product, level.product_id)
    out = cov.program_coverage(session, product, level.axis, level.grade,
                               rules_of(level.policy))
    if cache is not None:
        cache[key] = out
    return out


def _level_figures(level: m.Level, cache: CoverageCache | None):
    """The level's typed result, its level over limit [dB] and its time compression [dB],
    computed once per level when a cache is given."""
    key = ("level", level.id)
    if cache is not None and key in cache:
        return cache[key]
    result = result_of(level)
    out = (result, level_over_limit_db(result), compression_db(result))
    if cache is not None:
        cache[key] = out
    return out


def margins_of(session: Session, req: m.Requirement, ev: m.Evidence | None,
               cache: CoverageCache | None = None) -> Margins:
    """The margins of a requirement's evidence, split by cause."""
    if ev is None:
        return Margins()
    if ev.kind is m.EvidenceKind.analysis or (
            req.method is m.VerificationMethod.analysis and ev.achieved_margin is not None):
        return Margins(analysis_ms=ev.achieved_margin)
    level = req.level
    if level is None or level.purpose is not m.LevelPurpose.test:
        return Margins()
    result, over_db, comp_db = _level_figures(level, cache)
    out: dict = {"level_over_limit_db": over_db, "compression_db": comp_db,
                 "over_limit_measure": OVER_LIMIT_MEASURE[result.kind]}
    if ev.kind is not m.EvidenceKind.test:  # similarity, inspection: no record to judge
        return Margins(**out)
    out["achieved_over_limit_db"] = achieved_over_limit_db(result, ev)
    out["tolerance"] = "pass" if ev.verdict is m.Verdict.passed else "fail"
    out["tolerance_reason"] = str(ev.summary.get("reason", ""))
    required = coverage_required(rules_of(level.policy), level.grade)
    out.update(_coverage_block(sequence_coverage(session, level, cache), required))
    return Margins(**out)


# --- the columns every interface shows ----------------------------------------------------

#: Column headers of the margins, each naming its unit (CLI, web, PDF and CSV alike).
COLUMNS = (
    "level over limit [dB]",
    "time compression [dB, not a margin]",
    "achieved over limit [dB]",
    "tolerance of the record",
    "fatigue coverage FDS test/life [dB at Hz, per b]",
    "peak coverage ERS test/life [dB at Hz]",
    "over-test ERS [dB at Hz, ceiling]",
    "analysis MS [-]",
)


def cells(value: Margins | dict) -> list[str]:
    """The margins as the texts of :data:`COLUMNS`, in the same order ("-" when empty)."""
    mg = value if isinstance(value, Margins) else Margins.model_validate(value)
    fatigue = "; ".join(
        f"{w.decibels(f.worst_db, f.required_db)} at {w.frequency(f.worst_fn_hz)} (b = {f.b})"
        + ("" if f.passed else " short")
        for f in mg.fatigue) or "-"
    peak = over = "-"
    if mg.peak is not None:
        p = mg.peak
        peak = (f"{w.decibels(p.worst_db, p.required_db)} at {w.frequency(p.worst_fn_hz)}"
                + ("" if p.passed else " short"))
        over = (f"{w.decibels(p.overtest_db, p.overtest_limit_db)} at "
                f"{w.frequency(p.overtest_fn_hz)} "
                f"(ceiling {w.decibels(p.overtest_limit_db)})"
                + ("" if p.overtest_passed else " beyond the ceiling") if p.overtest_db is not None
                else f"none (ceiling {w.decibels(p.overtest_limit_db)})")
    if mg.coverage_required is False and mg.fatigue:
        fatigue += " (not asked for this grade)"
    return [
        w.decibels(mg.level_over_limit_db) if mg.level_over_limit_db is not None else "-",
        w.decibels(mg.compression_db) if mg.compression_db is not None else "-",
        w.decibels(mg.achieved_over_limit_db) if mg.achieved_over_limit_db is not None
        else "-",
        mg.tolerance or "-",
        fatigue,
        peak,
        over,
        f"{mg.analysis_ms:+.3f}" if mg.analysis_ms is not None else "-",
    ]


def verdict_words(verdicts: r.Verdicts | dict) -> list[str]:
    """A level's verdicts in the words every interface prints (CLI derive/show, the web
    level page and the specification PDF): "numeric method: converged", "controller:
    controllable", "FDS b = 4: does NOT cover the life", ..."""
    v = verdicts if isinstance(verdicts, r.Verdicts) else r.Verdicts.model_validate(verdicts)
    words = [f"numeric method: {'converged' if v.converged else 'NOT converged'}",
             "controller: " + ("not applicable" if v.controllable is None
                               else "controllable" if v.controllable else "NOT controllable")]
    words += [f"{what}: {'covers the life' if ok else 'does NOT cover the life'}"
              for what, ok in v.covers_life.items()]
    return words
