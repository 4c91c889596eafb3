"""Evidence against a requirement: analysis results, test records, similarity, inspection.

Evidence is append-only and carries the hash of the level it was made against, so a
later change of the level's inputs turns the requirement stale rather than silently
verified. Test records are checked automatically against the level's tolerances.
"""

from __future__ import annotations

from typing import Any, Literal

import numpy as np
from pydantic import BaseModel
from sqlalchemy.orm import Session

from qualplan.dynamics import psd as core_psd
from qualplan.dynamics import srs as core_srs
from qualplan.dynamics.units import db_amplitude
from qualplan.planning import envdata, imports
from qualplan.planning import results as res
from qualplan.planning import schemas as s
from qualplan.planning import wording as w
from qualplan.planning.access import Actor, record, require_for
from qualplan.planning.catalog import get
from qualplan.planning.errors import Conflict, ValidationFailed
from qualplan.planning.levels import result_of
from qualplan.planning.requirements import status_of
from qualplan.store import models as m
from qualplan.store.repositories import EvidenceRepository


def _add(
    session: Session,
    actor: Actor,
    req: m.Requirement,
    kind: m.EvidenceKind,
    verdict: m.Verdict,
    summary: dict[str, Any],
    *,
    achieved: float | None = None,
    data: np.ndarray | None = None,
    similar: int | None = None,
    rationale: str = "",
) -> m.Evidence:
    ev = EvidenceRepository(session).add(
        m.Evidence(
            requirement_id=req.id,
            kind=kind,
            level_id=req.level_id,
            level_hash=req.level.level_hash if req.level is not None else None,
            verdict=verdict,
            achieved_margin=achieved,
            summary=summary,
            data=data,
            similar_requirement_id=similar,
            rationale=rationale,
            author=actor.name,
        )
    )
    # the requirement's evidence list is read again when next asked for (no query now:
    # refreshing it read every evidence row of the requirement, arrays included)
    session.expire(req, ["evidence"])
    record(
        session,
        actor,
        "add-evidence",
        "requirement",
        req.id,
        key=req.key,
        evidence=ev.id,
        kind=kind.value,
        verdict=verdict.value,
    )
    return ev


def add_analysis(
    session: Session, actor: Actor, requirement_id: int, cmd: s.AnalysisEvidenceIn
) -> m.Evidence:
    """An analysis result: margin of safety MS = allowable / (FS x applied) - 1."""
    req = get(session, m.Requirement, requirement_id, "requirement")
    require_for(session, actor, req, m.Role.engineer, "adding evidence")
    if cmd.applied <= 0:
        raise ValidationFailed(
            "applied", cmd.applied, "must be > 0 (same sign convention as the allowable)"
        )
    if cmd.allowable <= 0:
        raise ValidationFailed("allowable", cmd.allowable, "must be > 0")
    ms = cmd.allowable / (cmd.factor_of_safety * cmd.applied) - 1.0
    ok = ms >= req.required_margin
    summary = {
        "applied": {"value": cmd.applied, "unit": cmd.units},
        "allowable": {"value": cmd.allowable, "unit": cmd.units},
        "factor_of_safety": cmd.factor_of_safety,
        "margin_of_safety": ms,
        "reason": f"MS = {cmd.allowable:g} / ({cmd.factor_of_safety:g} x {cmd.applied:g}) - 1 "
        f"= {ms:+.3f} ({'>=' if ok else '<'} required {req.required_margin:+.3f})",
        "note": cmd.note,
    }
    return _add(
        session,
        actor,
        req,
        m.EvidenceKind.analysis,
        m.Verdict.passed if ok else m.Verdict.failed,
        summary,
        achieved=ms,
    )


def add_test_record(
    session: Session, actor: Actor, requirement_id: int, cmd: s.TestEvidenceIn
) -> m.Evidence:
    """An achieved control spectrum checked against the requirement's level."""
    req = get(session, m.Requirement, requirement_id, "requirement")
    require_for(session, actor, req, m.Role.engineer, "adding evidence")
    if req.level is None:
        raise ValidationFailed("requirement", req.key, "points at no level to test against")
    level = req.level
    if level.purpose is not m.LevelPurpose.test:
        raise ValidationFailed("requirement", req.key, "its level is an analysis level")
    f = np.asarray(cmd.freq_hz, float)
    v = np.asarray(cmd.values, float)
    if f.size != v.size:
        raise ValidationFailed("values", f"{v.size} values", f"must match freq_hz ({f.size})")
    result = result_of(level)
    with envdata.core_errors(""):
        if isinstance(result, res.RandomResult):
            verdict, summary, achieved, _ = _check_random(result, f, v, cmd.duration_s)
        elif isinstance(result, res.ShockResult):
            verdict, summary, achieved, _ = _check_shock(result, f, v, cmd.shocks)
        else:
            verdict, summary, achieved, _ = _check_sine(result, f, v)
    summary["note"] = cmd.note
    return _add(
        session,
        actor,
        req,
        m.EvidenceKind.test,
        verdict,
        summary,
        achieved=achieved,
        data=np.vstack([f, v]),
    )


def add_test_record_file(
    session: Session,
    actor: Actor,
    requirement_id: int,
    filename: str,
    content: bytes,
    *,
    value_units: str | None,
    duration_s: float | None = None,
    shocks: int | None = None,
    note: str = "",
) -> m.Evidence:
    """A test record uploaded as a file: CSV (Hz, value) in declared units, or JSON."""
    req = get(session, m.Requirement, requirement_id, "requirement")
    require_for(session, actor, req, m.Role.engineer, "adding evidence")
    if req.level is None:
        raise ValidationFailed("requirement", req.key, "points at no level to test against")
    data, _ = imports.environment_data_from_file(
        req.level.kind, filename, content, value_units=value_units
    )
    key = imports.VALUE_KEY[req.level.kind]
    if "freq_hz" not in data or key not in data:
        raise ValidationFailed("file", filename, f"must hold freq_hz and {key}")
    return add_test_record(
        session,
        actor,
        requirement_id,
        s.TestEvidenceIn(
            freq_hz=data["freq_hz"],
            values=data[key],
            duration_s=duration_s,
            shocks=shocks,
            note=note,
        ),
    )


def _verdict(ok: bool) -> m.Verdict:
    return m.Verdict.passed if ok else m.Verdict.failed


class JudgedBand(BaseModel):
    """The tolerance band a test record was judged against, at the record's own judged
    frequencies (those inside the level's band): the nominal level there and its lower
    and upper limits, in the level's unit. ``outer_*`` is the wider band of a shock rule
    that lets a share of points lie outside the band."""

    freq_hz: list[float]
    nominal: list[float]
    lower: list[float]
    upper: list[float]
    outer_lower: list[float] | None = None
    outer_upper: list[float] | None = None
    #: The band in words, e.g. "±3 dB" or "-1.5/+3 dB (outer -3/+6 dB)".
    label: str


def _floats(x) -> list[float]:
    return [float(v) for v in np.asarray(x, float)]


def _check_random(level: res.RandomResult, f, v, duration_s):
    chk = core_psd.check_against(f, v, level.freq_hz, level.asd_g2_hz,
                                 tol_db=level.tolerance_db,
                                 grms_tol_pct=level.grms_tolerance_pct)
    problems = []
    bad = int((~chk.line_pass).sum())
    if bad:
        problems.append(f"{bad} of {chk.line_pass.size} lines outside "
                        f"±{w.number(level.tolerance_db)} dB; worst "
                        f"{w.decibels(chk.worst_deviation_db)} at "
                        f"{w.frequency(chk.worst_freq_hz)}")
    if not chk.grms_pass:
        problems.append(f"g rms {w.number(chk.grms_achieved)} g is "
                        f"{w.decibels(chk.grms_deviation_db)} from the specified "
                        f"{w.number(chk.grms_spec)} g (allowed "
                        f"±{w.number(level.grms_tolerance_pct)} %)")
    required_s = level.duration_s * (1 - level.duration_tolerance_pct / 100)
    if duration_s is None:
        problems.append("no test duration given")
    elif duration_s < required_s:
        problems.append(f"duration {w.duration(duration_s)} is shorter than the required "
                        f"{w.duration(level.duration_s)} "
                        f"(-{w.number(level.duration_tolerance_pct)} %)")
    achieved = db_amplitude(chk.grms_achieved / level.limit.grms)
    spec = np.asarray(chk.spec_asd_g2_hz)
    band = JudgedBand(freq_hz=_floats(chk.freq_hz), nominal=_floats(spec),
                      lower=_floats(spec * 10.0 ** (np.asarray(chk.lower_db) / 10.0)),
                      upper=_floats(spec * 10.0 ** (np.asarray(chk.upper_db) / 10.0)),
                      label=f"±{level.tolerance_db:g} dB")
    summary = {
        "lines": int(chk.line_pass.size), "lines_outside": bad,
        "worst_freq_hz": chk.worst_freq_hz, "worst_deviation_db": chk.worst_deviation_db,
        "fraction_in_tolerance": chk.fraction_in_tolerance,
        "achieved_grms": {"value": chk.grms_achieved, "unit": "g rms"},
        "specified_grms": {"value": chk.grms_spec, "unit": "g rms"},
        "duration": {"value": duration_s, "unit": "s"},
        "achieved_margin_db": {"value": achieved, "unit": "dB over the limit level (g rms)"},
        "reason": "; ".join(problems) if problems else
                  f"all {chk.line_pass.size} lines within ±{w.number(level.tolerance_db)} dB "
                  f"(worst {w.decibels(chk.worst_deviation_db)} at "
                  f"{w.frequency(chk.worst_freq_hz)}), g rms {w.number(chk.grms_achieved)} g "
                  f"within ±{w.number(level.grms_tolerance_pct)} %, "
                  f"duration {w.duration(duration_s)}",
    }
    return _verdict(not problems), summary, achieved, band


def _check_shock(level: res.ShockResult, f, v, shocks):
    nominal = core_srs.SrsProfile(level.freq_hz, level.accel_g)
    band = (f >= nominal.freq_hz[0]) & (f <= nominal.freq_hz[-1])
    if band.sum() < 2:
        raise ValidationFailed("freq_hz", [float(f[0]), float(f[-1])],
                               f"fewer than 2 points inside the level's band "
                               f"{nominal.freq_hz[0]:g}-{nominal.freq_hz[-1]:g} Hz")
    f, v = f[band], v[band]
    chk = core_srs.check_srs(
        f, v, nominal, lower_db=level.lower_db, upper_db=level.upper_db,
        outer_lower_db=level.outer_lower_db, outer_upper_db=level.outer_upper_db,
        min_share_within_band=(1.0 if level.min_share_within_band is None
                               else level.min_share_within_band),
        min_fraction_above=level.min_fraction_above_nominal or None,
    )
    problems = list(chk.reasons)
    need = level.shocks_per_axis
    if shocks is None:
        problems.append("the number of shocks applied is not given")
    elif shocks < need:
        problems.append(f"{shocks} shocks applied, {need} required per axis")
    limit = core_srs.SrsProfile(level.limit.freq_hz, level.limit.accel_g)
    inside = (f >= limit.freq_hz[0]) & (f <= limit.freq_hz[-1])
    achieved = (float(np.mean(20 * np.log10(v[inside] / limit.value_at(f[inside]))))
                if inside.any() else None)
    summary = {
        "check": chk.as_dict(),
        "worst_freq_hz": chk.worst_freq_hz,
        "worst_deviation_db": chk.worst_deviation_db,
        "share_within_band": chk.share_within_band,
        "fraction_at_or_above_nominal": chk.fraction_at_or_above_nominal,
        "points_outside_band_not_judged": int((~band).sum()),
        "shocks": shocks,
        "shocks_required": need,
        "achieved_margin_db": {"value": achieved, "unit": "dB over the limit SRS (mean)"},
        "reason": "; ".join(problems) if problems else chk.reason,
    }
    nom = np.asarray(chk.nominal_g)
    label = f"{chk.lower_db:+g}/{chk.upper_db:+g} dB"
    outer = {}
    if chk.outer_lower_db is not None:
        outer = {"outer_lower": _floats(nom * 10.0 ** (chk.outer_lower_db / 20.0)),
                 "outer_upper": _floats(nom * 10.0 ** (chk.outer_upper_db / 20.0))}
        label += f" (outer {chk.outer_lower_db:+g}/{chk.outer_upper_db:+g} dB)"
    band_out = JudgedBand(freq_hz=_floats(chk.freq_hz), nominal=_floats(nom),
                          lower=_floats(nom * 10.0 ** (chk.lower_db / 20.0)),
                          upper=_floats(nom * 10.0 ** (chk.upper_db / 20.0)),
                          label=label, **outer)
    return _verdict(not problems), summary, achieved, band_out


def _check_sine(level: res.SineResult, f, v):
    ref_f, ref_a = np.asarray(level.freq_hz), np.asarray(level.accel_g)
    inside = (f >= ref_f[0]) & (f <= ref_f[-1])
    if not inside.any():
        raise ValidationFailed(
            "freq_hz",
            [float(f[0]), float(f[-1])],
            f"no point inside the level's band {ref_f[0]:g}-{ref_f[-1]:g} Hz",
        )
    nominal = np.exp(np.interp(np.log(f[inside]), np.log(ref_f), np.log(ref_a)))
    ratio = v[inside] / nominal
    tol = level.tolerance_pct / 100
    bad = np.abs(ratio - 1) > tol
    worst = int(np.argmax(np.abs(ratio - 1)))
    lim_a = np.exp(
        np.interp(
            np.log(f[inside]), np.log(level.limit.freq_hz), np.log(level.limit.accel_g)
        )
    )
    achieved = float(np.min(20 * np.log10(v[inside] / lim_a)))
    reason = (
        f"{int(bad.sum())} of {int(inside.sum())} points outside "
        f"±{w.number(level.tolerance_pct)} %; worst {100 * (ratio[worst] - 1):+.1f} % at "
        f"{w.frequency(f[inside][worst])}"
        if bad.any()
        else f"within ±{w.number(level.tolerance_pct)} % at every point"
    )
    summary = {
        "points": int(inside.sum()),
        "points_outside": int(bad.sum()),
        "worst_freq_hz": float(f[inside][worst]),
        "worst_pct": float(100 * (ratio[worst] - 1)),
        "achieved_margin_db": {"value": achieved, "unit": "dB over the limit (minimum)"},
        "reason": reason,
    }
    band = JudgedBand(freq_hz=_floats(f[inside]), nominal=_floats(nominal),
                      lower=_floats(nominal * (1 - tol)), upper=_floats(nominal * (1 + tol)),
                      label=f"±{level.tolerance_pct:g} %")
    return _verdict(not bad.any()), summary, achieved, band


def add_similarity(
    session: Session, actor: Actor, requirement_id: int, cmd: s.SimilarityEvidenceIn
) -> m.Evidence:
    """Claim similarity to another product's requirement (it must be verified now)."""
    req = get(session, m.Requirement, requirement_id, "requirement")
    require_for(session, actor, req, m.Role.engineer, "adding evidence")
    other = get(session, m.Requirement, cmd.similar_requirement_id, "requirement")
    if other.id == req.id:
        raise ValidationFailed("similar_requirement_id", other.id, "must be another requirement")
    seen, hop = {other.id}, other
    while hop.evidence and hop.evidence[-1].similar_requirement_id is not None:
        nxt = hop.evidence[-1].similar_requirement_id
        if nxt == req.id:
            raise ValidationFailed("similar_requirement_id", other.id,
                                   f"{other.key} is itself verified by similarity to "
                                   f"{req.key}: the claim would form a cycle")
        if nxt in seen:
            break
        seen.add(nxt)
        hop = get(session, m.Requirement, nxt, "requirement")
    st = status_of(session, other)
    if st.status != "verified":
        raise Conflict(
            f"requirement {other.key} is {st.status}, not verified: it cannot carry "
            "a similarity claim"
        )
    summary = {
        "similar_to": other.key,
        "similar_product_id": other.product_id,
        "reason": f"similar to {other.key} (verified): {cmd.rationale}",
    }
    return _add(
        session,
        actor,
        req,
        m.EvidenceKind.similarity,
        m.Verdict.passed,
        summary,
        similar=other.id,
        rationale=cmd.rationale,
    )


def add_inspection(
    session: Session, actor: Actor, requirement_id: int, cmd: s.InspectionEvidenceIn
) -> m.Evidence:
    req = get(session, m.Requirement, requirement_id, "requirement")
    require_for(session, actor, req, m.Role.engineer, "adding evidence")
    summary = {"reason": f"inspection {'passed' if cmd.passed else 'failed'}: {cmd.note}"}
    return _add(
        session,
        actor,
        req,
        m.EvidenceKind.inspection,
        _verdict(cmd.passed),
        summary,
        rationale=cmd.note,
    )


# --- a test record against its level: what the verdict used, for the plots -------------

QUANTITY = {"random": ("ASD", "g²/Hz"), "shock": ("SRS", "g"), "sine": ("acceleration",
                                                                        "g peak")}


class RecordOverlay(BaseModel):
    """A test record with the level and the tolerance band its verdict was judged on.

    The band is computed by the same check that gave the stored verdict (``_check_*``),
    on the record's stored lines and the level it was made against; nothing is judged
    a second way for the plot.
    """

    evidence_id: int
    requirement_id: int
    requirement_key: str
    level_id: int
    level: str
    kind: Literal["random", "sine", "shock"]
    axis: str
    #: "ASD", "SRS" or "acceleration", and its unit ("g²/Hz", "g", "g peak").
    quantity: str
    unit: str
    q: float | None = None
    #: Every point of the record (points outside the level's band were not judged).
    record_freq_hz: list[float]
    record_values: list[float]
    #: The level's breakpoints (sine: its curve at the level's points).
    level_freq_hz: list[float]
    level_values: list[float]
    band: JudgedBand
    verdict: str
    reason: str
    author: str
    made_at: str
    #: True when the level's hash changed since (the evidence is stale).
    level_changed: bool = False


def record_overlay(session: Session, evidence_id: int) -> RecordOverlay:
    """A test record (evidence) over its level and the band its verdict used."""
    ev = get(session, m.Evidence, evidence_id, "evidence")
    if ev.kind is not m.EvidenceKind.test or ev.data is None or ev.level is None:
        raise ValidationFailed("evidence", evidence_id,
                               f"is {ev.kind.value} evidence, not a test record against a "
                               "level: it has no record to plot")
    level = ev.level
    result = result_of(level)
    data = np.asarray(ev.data, float)
    f, v = data[0], data[1]
    with envdata.core_errors(""):
        if isinstance(result, res.RandomResult):
            duration = (ev.summary.get("duration") or {}).get("value")
            *_, band = _check_random(result, f, v, duration)
        elif isinstance(result, res.ShockResult):
            *_, band = _check_shock(result, f, v, ev.summary.get("shocks"))
        else:
            *_, band = _check_sine(result, f, v)
    kind = level.kind.value
    qty, unit = QUANTITY[kind]
    return RecordOverlay(
        evidence_id=ev.id, requirement_id=ev.requirement_id,
        requirement_key=ev.requirement.key, level_id=level.id,
        level=f"{level.name} #{level.number}", kind=kind, axis=level.axis.value,
        quantity=qty, unit=unit, q=getattr(result, "q", None),
        record_freq_hz=_floats(f), record_values=_floats(v),
        level_freq_hz=_floats(result.freq_hz), level_values=_floats(result.values),
        band=band, verdict=ev.verdict.value, reason=str(ev.summary.get("reason", "")),
        author=ev.author, made_at=f"{ev.created_at:%Y-%m-%d %H:%M} UTC",
        level_changed=ev.level_hash != level.level_hash,
    )


def record_evidence_ids(session: Session, requirement_id: int) -> list[int]:
    """Ids of the test records of a requirement that can be plotted over their level."""
    return [e.id for e in EvidenceRepository(session).for_requirement(requirement_id)
            if e.kind is m.EvidenceKind.test and e.data is not None and e.level_id is not None]


def list_evidence(session: Session, requirement_id: int) -> list[m.Evidence]:
    get(session, m.Requirement, requirement_id, "requirement")
    return list(EvidenceRepository(session).for_requirement(requirement_id))
