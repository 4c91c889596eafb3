"""Modal summaries of a product and the peak-response estimates made from them.

A modal summary (the analyst's table of modes: fn, damping, effective mass per axis)
is revisioned like an environment: its header is editable, its revisions are
append-only with a content hash. A response estimate applies one revision to one
analysis or test level on one axis (``qualplan.dynamics.modal``): the SRS modal
peaks with ABS/SRSS/NRL/CQC, the random rms with 1/2/3 sigma and Davenport's
expected peak, or the sine steady-state peak. It is stored with the hashes of both
inputs and turns stale when the summary gets a new revision, the level a new
number, or the level itself goes stale. An estimate can close an analysis
requirement: MS = allowable / (FS x applied) - 1 on one of its quantities.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from datetime import datetime
from typing import Any

import numpy as np
from pydantic import BaseModel, ConfigDict, Field
from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.dynamics import modal as core_modal
from qualplan.dynamics.errors import AccuracyWarning
from qualplan.dynamics.units import G0_M_S2
from qualplan.io.modal import read_modal_summary
from qualplan.planning import envdata, estimates
from qualplan.planning import results as res
from qualplan.planning.access import Actor, record, require_for
from qualplan.planning.catalog import get
from qualplan.planning.errors import Conflict, ValidationFailed, VersionMismatch
from qualplan.planning.levels import result_of
from qualplan.store import models as m
from qualplan.store.hashing import json_hash

K = m.EnvironmentKind


# --- schemas --------------------------------------------------------------------------


class _Read(BaseModel):
    model_config = ConfigDict(from_attributes=True)


class ModalRevisionRead(_Read):
    id: int
    summary_id: int
    number: int
    spec: dict[str, Any]
    content_hash: str
    author: str
    note: str
    created_at: datetime


class ModalSummaryRead(_Read):
    id: int
    product_id: int
    name: str
    source: str
    created_at: datetime
    latest_revision: int | None = None
    modes: int | None = None


class EstimateIn(BaseModel):
    model_config = ConfigDict(extra="forbid")

    modal_revision_id: int
    level_id: int
    axis: m.Axis | None = Field(default=None, description="X, Y or Z; default the level's axis")
    duration_s: float | None = Field(
        default=None, gt=0,
        description="Random: exposure for the expected peak [s]; default the level's duration "
        "(test level) or its life exposure (analysis level)")
    residual_mass: bool = Field(
        default=True,
        description="Add the product mass not in the modes' effective masses as a rigid mass")


class EstimateRead(_Read):
    id: int
    product_id: int
    modal_revision_id: int
    level_id: int
    axis: m.Axis
    settings: dict[str, Any]
    result: dict[str, Any]
    input_hashes: dict[str, Any]
    estimate_hash: str
    author: str
    created_at: datetime
    stale: bool = False
    stale_reasons: list[str] = []


class EstimateEvidenceIn(BaseModel):
    model_config = ConfigDict(extra="forbid")

    estimate_id: int
    quantity: str = Field(description="A key of the estimate's `quantities`, e.g. "
                          "base_force_cqc_n")
    allowable: float = Field(gt=0, description="Allowable value, in the quantity's unit")
    factor_of_safety: float = Field(default=1.0, gt=0)
    note: str = ""


# --- level input: the one place that reads a level's result ----------------------------


@dataclass(frozen=True)
class LevelCurve:
    """A level's breakpoints as the estimates use them.

    Attributes
    ----------
    kind : EnvironmentKind
        random, shock or sine.
    freq_hz : list of float
        Breakpoint frequencies. [Hz]
    values : list of float
        ASD [g^2/Hz] (random), SRS [g] (shock) or peak acceleration [g] (sine).
    q : float or None
        Shock: the Q the SRS refers to. [unitless]
    duration_s : float or None
        Random: the level's duration (test level) or life exposure (analysis level). [s]
    duration_basis : str
        Where `duration_s` comes from.
    grms : float or None
        Random: overall level. [g rms]
    margin_db : float or None
        The margin the derivation added over the limit level. [dB]
    sweep_rate_oct_per_min, sweep_time_s : float or None
        Sine: sweep rate [oct/min] and the time of the sweeps [s].
    """

    kind: m.EnvironmentKind
    freq_hz: list[float]
    values: list[float]
    q: float | None
    duration_s: float | None
    duration_basis: str
    grms: float | None = None
    margin_db: float | None = None
    sweep_rate_oct_per_min: float | None = None
    sweep_time_s: float | None = None


def _margin_db(r) -> float | None:
    for st in r.steps:
        if st.step in ("analysis margin", "margin") and st.db is not None:
            return float(st.db)
        if st.step == "factor" and st.values.get("factor"):
            return 20.0 * math.log10(float(st.values["factor"]))
    return None


def level_curve(level: m.Level) -> LevelCurve:
    """Read a level's breakpoints and facts from its typed result (planning.results)."""
    r = result_of(level)
    if isinstance(r, res.RandomResult):
        if r.duration_s:
            dur, basis = float(r.duration_s), "the level's test duration"
        elif r.life_exposure_s:
            dur, basis = float(r.life_exposure_s), "the life exposure the level covers"
        else:
            dur, basis = None, ""
        return LevelCurve(level.kind, list(r.freq_hz), list(r.asd_g2_hz), None, dur, basis,
                          grms=float(r.grms), margin_db=_margin_db(r))
    if isinstance(r, res.ShockResult):
        return LevelCurve(level.kind, list(r.freq_hz), list(r.accel_g), float(r.q), None, "",
                          margin_db=_margin_db(r))
    if isinstance(r, res.SineResult):
        return LevelCurve(level.kind, list(r.freq_hz), list(r.accel_g), None, None, "",
                          sweep_rate_oct_per_min=r.sweep_rate_oct_per_min,
                          sweep_time_s=r.sweep_time_s)
    raise ValidationFailed("level_id", level.id, f"a {level.kind.value} level has no estimate")


# --- modal summaries --------------------------------------------------------------------


def _latest(session: Session, summary_id: int) -> m.ModalSummaryRevision | None:
    return session.scalar(
        select(m.ModalSummaryRevision)
        .where(m.ModalSummaryRevision.summary_id == summary_id)
        .order_by(m.ModalSummaryRevision.number.desc())
        .limit(1)
    )


def import_modal_summary(
    session: Session, actor: Actor, product_id: int, name: str, filename: str, content: bytes,
    *, source: str = "", note: str = "", response_unit: str | None = None,
    expected_revision: int | None = None,
) -> m.ModalSummaryRevision:
    """Import a modal summary file as the next revision of the product's summary `name`.

    The first import creates the summary; an identical content is refused.
    """
    product = get(session, m.Product, product_id, "product")
    require_for(session, actor, product, m.Role.engineer, "importing a modal summary")
    name = name.strip()
    if not name:
        raise ValidationFailed("name", name, "must not be empty")
    with envdata.core_errors(""):
        table = read_modal_summary(filename, content, response_unit=response_unit)
    spec = table.to_spec()
    spec["source_file"] = filename
    if product.mass_kg is not None:
        for axis, meff in table.meff_kg.items():
            total = float(np.sum(meff))
            if total > product.mass_kg * 1.001:
                raise ValidationFailed(
                    f"meff_{axis.lower()}_kg", round(total, 6),
                    f"the effective masses add up to more than the product's mass "
                    f"{product.mass_kg:g} kg")
    summary = session.scalar(select(m.ModalSummary).where(
        m.ModalSummary.product_id == product.id, m.ModalSummary.name == name))
    if summary is None:
        summary = m.ModalSummary(product_id=product.id, name=name, source=source)
        session.add(summary)
        session.flush()
        record(session, actor, "create", "modal-summary", summary.id, name=name,
               product=product.name)
    latest = _latest(session, summary.id)
    if expected_revision is not None and latest is not None and \
            latest.number != expected_revision:
        raise VersionMismatch("modal summary", summary.id, expected_revision, latest.number)
    digest = json_hash(spec)
    if latest is not None and latest.content_hash == digest:
        raise Conflict(f"the modes are identical to revision {latest.number} of modal summary "
                       f"{name!r}; nothing to revise")
    rev = m.ModalSummaryRevision(
        summary_id=summary.id, number=(latest.number + 1) if latest else 1, spec=spec,
        content_hash=digest, author=actor.name, note=note or "")
    session.add(rev)
    session.flush()
    record(session, actor, "revise", "modal-summary", summary.id, revision=rev.number,
           content_hash=digest, modes=len(spec["modes"]), note=note)
    return rev


def read_summary(session: Session, summary: m.ModalSummary) -> ModalSummaryRead:
    out = ModalSummaryRead.model_validate(summary)
    latest = _latest(session, summary.id)
    if latest is not None:
        out.latest_revision, out.modes = latest.number, len(latest.spec["modes"])
    return out


def list_summaries(session: Session, product_id: int | None = None) -> list[m.ModalSummary]:
    stmt = select(m.ModalSummary).order_by(m.ModalSummary.id)
    if product_id is not None:
        stmt = stmt.where(m.ModalSummary.product_id == product_id)
    return list(session.scalars(stmt))


def summary_by_id(session: Session, summary_id: int) -> m.ModalSummary:
    return get(session, m.ModalSummary, summary_id, "modal summary")


def revision_by_id(session: Session, revision_id: int) -> m.ModalSummaryRevision:
    return get(session, m.ModalSummaryRevision, revision_id, "modal summary revision")


def history(session: Session, summary_id: int) -> list[m.ModalSummaryRevision]:
    summary = summary_by_id(session, summary_id)
    return list(summary.revisions)


def summary_revision(session: Session, summary_id: int, number: int | None = None
                     ) -> m.ModalSummaryRevision:
    """Revision `number` of a summary (the latest when None)."""
    summary = summary_by_id(session, summary_id)
    if number is None:
        rev = _latest(session, summary.id)
    else:
        rev = session.scalar(select(m.ModalSummaryRevision).where(
            m.ModalSummaryRevision.summary_id == summary.id,
            m.ModalSummaryRevision.number == number))
    if rev is None:
        raise ValidationFailed("revision", number, f"modal summary {summary.name!r} has no such "
                               "revision")
    return rev


# --- estimates --------------------------------------------------------------------------


def _modes_for_axis(spec: dict, axis: m.Axis):
    modes = spec["modes"]
    if not all(axis.value in md["meff_kg"] for md in modes):
        raise ValidationFailed("axis", axis.value, "the modal summary gives no effective masses "
                               f"on this axis (it has {sorted(modes[0]['meff_kg'])})")
    fn = np.array([md["fn_hz"] for md in modes], float)
    zeta = np.array([md["zeta"] for md in modes], float)
    meff = np.array([md["meff_kg"][axis.value] for md in modes], float)
    return fn, zeta, meff


def _quantity_of(spec: dict, axis: m.Axis):
    """(gamma, phi, unit) when every mode gives a participation on `axis` and a response."""
    modes = spec["modes"]
    if not spec.get("response_unit") or not all(
            "response" in md and axis.value in (md.get("participation") or {}) for md in modes):
        return None
    return (np.array([md["participation"][axis.value] for md in modes], float),
            np.array([md["response"] for md in modes], float), spec["response_unit"])


def _qty(value: float, unit: str, basis: str) -> dict[str, Any]:
    return {"value": float(value), "unit": unit, "basis": basis}


def _mode_rows(fn, zeta, meff, **cols) -> list[dict[str, Any]]:
    rows = []
    for i in range(fn.size):
        row = {"mode": i + 1, "fn_hz": float(fn[i]), "zeta": float(zeta[i]),
               "meff_kg": float(meff[i])}
        for k, v in cols.items():
            row[k] = None if v is None else float(v[i])
        rows.append(row)
    return rows


def _estimate_shock(curve: LevelCurve, fn, zeta, meff, notes: list[str], quantity=None
                    ) -> dict[str, Any]:
    res = core_modal.spectrum_response(curve.freq_hz, curve.values, fn, zeta, meff)
    z_srs = 1.0 / (2.0 * curve.q)
    if np.any(np.abs(zeta - z_srs) > 1e-9):
        notes.append(f"the SRS is given at Q = {curve.q:g} (zeta {z_srs:.3g}); modes with other "
                     "damping read it as is (no damping correction)")
    if not res.in_band.all():
        notes.append(f"{int((~res.in_band).sum())} modes lie outside the SRS band and are left "
                     "out of the combinations")
    q = {f"base_force_{k}_n": _qty(v, "N peak", f"{k.upper()} of the modal base forces "
                                   "m_eff SRS(fn) g0")
         for k, v in res.force_combined_n.items()}
    if quantity is not None:
        gamma, phi, unit = quantity
        peaks = core_modal.quantity_spectrum_peaks(res.accel_g, fn, gamma, phi)
        for k in core_modal.METHODS:
            q[f"response_{k}"] = _qty(core_modal.combine(peaks, k, res.rho), f"{unit} peak",
                                      f"{k.upper()} of phi gamma SRS(fn) g0 / w^2 per mode")
    if meff.sum() > 0:
        q["accel_cqc_g"] = _qty(res.force_combined_n["cqc"] / (G0_M_S2 * meff.sum()),
                                "g peak", "CQC base force / (g0 x sum of effective masses)")
    return {
        "method": "response spectrum: per-mode peaks from the SRS at fn, combined by ABS, SRSS, "
                  "NRL and CQC (Der Kiureghian 1981)",
        "modes": _mode_rows(fn, zeta, meff, srs_g=res.accel_g, force_n=res.force_n,
                            in_band=res.in_band.astype(float)),
        "cqc_rho_max_offdiag": float(np.max(res.rho - np.eye(fn.size))) if fn.size > 1 else 0.0,
        "quantities": q,
    }


def _estimate_random(curve: LevelCurve, fn, zeta, meff, residual: float, duration_s,
                     notes: list[str], quantity=None) -> dict[str, Any]:
    res = core_modal.random_response(curve.freq_hz, curve.values, fn, zeta, meff,
                                     residual_kg=residual)
    out_band = (fn < curve.freq_hz[0]) | (fn > curve.freq_hz[-1])
    if out_band.any():
        notes.append(f"{int(out_band.sum())} modes lie outside the ASD band "
                     f"{curve.freq_hz[0]:g}-{curve.freq_hz[-1]:g} Hz (off-resonance only)")
    q = {}
    sig = core_modal.sigma_levels(res.force_rms_n)
    q["base_force_rms_n"] = _qty(res.force_rms_n, "N rms", "coherent modal superposition "
                                 "|sum m_eff H|^2 W")
    for s in sig:
        q[f"base_force_{s.k}sigma_n"] = _qty(s.value, "N", f"{s.k} sigma ({100 * s.probability:.2f}"
                                             " % of a Gaussian)")
    q["base_force_srss_rms_n"] = _qty(res.force_srss_rms_n, "N rms",
                                      "SRSS of the modal rms (comparison; reads low for close "
                                      "modes)")
    q["accel_rms_g"] = _qty(res.accel_rms_g, "g rms", "base force / (g0 x total mass)")
    q["accel_3sigma_g"] = _qty(3 * res.accel_rms_g, "g", "3 sigma")
    peak = None
    if duration_s is not None and res.nu0_hz * duration_s > 1:
        u = core_modal.peak_factor(res.nu0_hz, duration_s)
        peak = {"nu0_hz": res.nu0_hz, "duration_s": duration_s, "peak_factor": u}
        q["base_force_expected_peak_n"] = _qty(
            u * res.force_rms_n, "N peak", f"Davenport 1964: {u:.4g} x rms over {duration_s:g} s "
            f"at nu0 = {res.nu0_hz:.4g} Hz")
        q["accel_expected_peak_g"] = _qty(u * res.accel_rms_g, "g peak", "Davenport 1964")
    else:
        notes.append("no exposure duration: the expected peak (Davenport) is not computed")
    if quantity is not None:
        gamma, phi, unit = quantity
        qr = core_modal.quantity_random_response(curve.freq_hz, curve.values, fn, zeta, gamma,
                                                 phi)
        q["response_rms"] = _qty(qr.rms, f"{unit} rms", "coherent sum of phi q_k over the ASD "
                                 "(mode displacement)")
        q["response_3sigma"] = _qty(3 * qr.rms, unit, "3 sigma")
        if duration_s is not None and qr.nu0_hz * duration_s > 1:
            u = core_modal.peak_factor(qr.nu0_hz, duration_s)
            q["response_expected_peak"] = _qty(u * qr.rms, f"{unit} peak",
                                               f"Davenport 1964 at nu0 = {qr.nu0_hz:.4g} Hz")
    mode_peak = None
    if duration_s is not None and np.all(res.mode_nu0_hz * duration_s > 1):
        mode_peak = core_modal.peak_factor(res.mode_nu0_hz, duration_s) * res.mode_force_rms_n
    return {
        "method": "random: modal superposition with effective masses, coherent integration of "
                  "|sum m_eff H|^2 W over the ASD; 1/2/3 sigma; Davenport expected peak",
        "residual_kg": residual,
        "modes": _mode_rows(fn, zeta, meff, accel_rms_g=res.mode_accel_rms_g,
                            force_rms_n=res.mode_force_rms_n, nu0_hz=res.mode_nu0_hz,
                            force_expected_peak_n=mode_peak),
        "sigma_levels": [{"k": s.k, "force_n": s.value, "probability": s.probability}
                         for s in sig],
        "expected_peak": peak,
        "quantities": q,
    }


def _estimate_sine(curve: LevelCurve, fn, zeta, meff, residual: float, notes: list[str]
                   ) -> dict[str, Any]:
    res = core_modal.sine_response(curve.freq_hz, curve.values, fn, zeta, meff,
                                   residual_kg=residual)
    q = {
        "base_force_peak_n": _qty(
            res.force_n, "N peak",
            f"steady state, peak over the sweep at {res.force_freq_hz:.4g} Hz"),
        "accel_peak_g": _qty(res.force_n / (G0_M_S2 * (meff.sum() + residual)),
                             "g peak", "peak base force / (g0 x total mass)"),
    }
    notes.append("quasi-steady sweep: a fast sweep gives a lower real peak")
    return {
        "method": "sine: steady-state harmonic response per mode, peak over the swept band",
        "residual_kg": residual,
        "modes": _mode_rows(fn, zeta, meff, accel_g=res.mode_accel_g, freq_hz=res.mode_freq_hz,
                            force_n=res.mode_force_n),
        "quantities": q,
    }


def make_estimate(session: Session, actor: Actor, cmd: EstimateIn) -> m.ResponseEstimate:
    """Compute and store a peak-response estimate from a modal revision and a level."""
    rev = revision_by_id(session, cmd.modal_revision_id)
    require_for(session, actor, rev, m.Role.engineer, "making a response estimate")
    level = get(session, m.Level, cmd.level_id, "level")
    summary = rev.summary
    if level.product_id != summary.product_id:
        raise ValidationFailed("level_id", level.id, "the level belongs to another product than "
                               "the modal summary")
    axis = cmd.axis or level.axis
    if axis is m.Axis.all:
        raise ValidationFailed("axis", axis.value, "give X, Y or Z for a level on all axes")
    if level.axis not in (axis, m.Axis.all):
        raise ValidationFailed("axis", axis.value, f"the level is on axis {level.axis.value}")
    curve = level_curve(level)
    fn, zeta, meff = _modes_for_axis(rev.spec, axis)
    product = summary.product
    residual = 0.0
    if cmd.residual_mass and product.mass_kg is not None and curve.kind is not K.shock:
        residual = max(product.mass_kg - float(meff.sum()), 0.0)
    duration = cmd.duration_s if cmd.duration_s is not None else curve.duration_s
    notes: list[str] = []
    with envdata.core_errors(""), warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", AccuracyWarning)
        quantity = _quantity_of(rev.spec, axis)
        if curve.kind is K.shock:
            result = _estimate_shock(curve, fn, zeta, meff, notes, quantity)
        elif curve.kind is K.random:
            result = _estimate_random(curve, fn, zeta, meff, residual, duration, notes,
                                      quantity)
        else:
            result = _estimate_sine(curve, fn, zeta, meff, residual, notes)
    for w in caught:
        if issubclass(w.category, AccuracyWarning) and str(w.message) not in notes:
            notes.append(str(w.message))
    total_meff = float(meff.sum())
    result["notes"] = notes
    result["effective_mass_kg"] = total_meff
    if product.mass_kg:
        result["effective_mass_fraction"] = total_meff / product.mass_kg
        if total_meff < 0.9 * product.mass_kg:
            notes.append(f"the modes hold {100 * total_meff / product.mass_kg:.1f} % of the mass "
                         f"on {axis.value} (< 90 %, common practice): add modes or rely on the "
                         "residual mass")
    settings = {
        "kind": curve.kind.value,
        "axis": axis.value,
        "residual_mass": cmd.residual_mass,
        "residual_kg": residual,
        "duration_s": duration,
        "duration_basis": ("given" if cmd.duration_s is not None else curve.duration_basis)
        if duration is not None else "",
        "srs_q": curve.q,
        "level": {"id": level.id, "name": level.name, "number": level.number},
        "modal_summary": {"id": summary.id, "name": summary.name, "revision": rev.number},
    }
    hashes = {"modal_revision": {str(rev.id): rev.content_hash},
              "level": {str(level.id): level.level_hash}}
    est = m.ResponseEstimate(
        product_id=summary.product_id, modal_revision_id=rev.id, level_id=level.id, axis=axis,
        settings=settings, result=_json_safe(result), input_hashes=hashes,
        estimate_hash=json_hash({"settings": settings, "inputs": hashes}), author=actor.name)
    session.add(est)
    session.flush()
    record(session, actor, "estimate", "response-estimate", est.id, level=level.id,
           modal_revision=rev.id, axis=axis.value, estimate_hash=est.estimate_hash)
    return est


def _json_safe(value):
    if isinstance(value, dict):
        return {str(k): _json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return _json_safe(value.tolist())
    if isinstance(value, np.floating | np.integer | np.bool_):
        return _json_safe(value.item())
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def estimate_staleness(session: Session, estimate) -> list[str]:
    """Why an estimate no longer reflects its inputs (planning.estimates)."""
    return estimates.estimate_staleness(session, estimate)


def read_estimate(session: Session, est: m.ResponseEstimate) -> EstimateRead:
    out = EstimateRead.model_validate(est)
    out.stale_reasons = estimate_staleness(session, est)
    out.stale = bool(out.stale_reasons)
    return out


def estimate_by_id(session: Session, estimate_id: int) -> m.ResponseEstimate:
    return get(session, m.ResponseEstimate, estimate_id, "response estimate")


def list_estimates(session: Session, product_id: int | None = None) -> list[m.ResponseEstimate]:
    stmt = select(m.ResponseEstimate).order_by(m.ResponseEstimate.id)
    if product_id is not None:
        stmt = stmt.where(m.ResponseEstimate.product_id == product_id)
    return list(session.scalars(stmt))


# --- evidence ---------------------------------------------------------------------------


def record_as_evidence(session: Session, actor: Actor, requirement_id: int,
                       cmd: EstimateEvidenceIn) -> m.Evidence:
    """Close an analysis requirement with an estimate: MS = allowable / (FS x applied) - 1."""
    from qualplan.planning.evidence import _add

    req = get(session, m.Requirement, requirement_id, "requirement")
    require_for(session, actor, req, m.Role.engineer, "adding evidence")
    est = estimate_by_id(session, cmd.estimate_id)
    if req.product_id != est.product_id:
        raise ValidationFailed("estimate_id", est.id, "the estimate is of another product")
    if req.level_id is not None and req.level_id != est.level_id:
        raise ValidationFailed("estimate_id", est.id,
                               f"the estimate was made from level {est.level_id}, the "
                               f"requirement points at level {req.level_id}")
    stale = estimate_staleness(session, est)
    if stale:
        raise Conflict("the estimate is stale (" + "; ".join(stale) + "): make a new one")
    quantities = est.result.get("quantities", {})
    if cmd.quantity not in quantities:
        raise ValidationFailed("quantity", cmd.quantity, f"must be one of {sorted(quantities)}")
    qty = quantities[cmd.quantity]
    applied = float(qty["value"])
    if applied <= 0:
        raise ValidationFailed("quantity", cmd.quantity, f"its value {applied:g} is not > 0")
    ms = cmd.allowable / (cmd.factor_of_safety * applied) - 1.0
    ok = ms >= req.required_margin
    unit = qty["unit"]
    summary = {
        "estimate_id": est.id,
        "estimate_hash": est.estimate_hash,
        "input_hashes": est.input_hashes,
        "quantity": cmd.quantity,
        "basis": qty.get("basis", ""),
        "applied": {"value": applied, "unit": unit},
        "allowable": {"value": cmd.allowable, "unit": unit},
        "factor_of_safety": cmd.factor_of_safety,
        "margin_of_safety": ms,
        "reason": f"estimate {est.id} ({cmd.quantity}): MS = {cmd.allowable:g} / "
                  f"({cmd.factor_of_safety:g} x {applied:.4g} {unit}) - 1 = {ms:+.3f} "
                  f"({'>=' if ok else '<'} required {req.required_margin:+.3f})",
        "note": cmd.note,
    }
    return _add(session, actor, req, m.EvidenceKind.analysis,
                m.Verdict.passed if ok else m.Verdict.failed, summary, achieved=ms)


__all__ = [
    "EstimateEvidenceIn", "EstimateIn", "EstimateRead", "LevelCurve", "ModalRevisionRead",
    "ModalSummaryRead", "estimate_by_id", "estimate_staleness", "history", "import_modal_summary",
    "level_curve", "list_estimates", "list_summaries", "make_estimate", "read_estimate",
    "read_summary", "record_as_evidence", "revision_by_id", "summary_by_id", "summary_revision",
]


def steinberg_from_estimate(session: Session, estimate_id: int, mode: int, *,
                            board_edge_mm: float, component_length_mm: float,
                            board_thickness_mm: float, c: float = 1.0, r: float = 1.0
                            ) -> dict[str, Any]:
    """Steinberg's board check on one mode of a random estimate (the board's fundamental).

    Uses the mode's fn and its rms absolute acceleration from the estimate
    (Steinberg, Vibration Analysis for Electronic Equipment, 3rd ed., 2000; constants
    from memory). Not stored: a check to read beside the estimate.
    """
    est = estimate_by_id(session, estimate_id)
    if est.settings.get("kind") != "random":
        raise ValidationFailed("estimate_id", estimate_id, "must be a random estimate")
    rows = est.result["modes"]
    if not 1 <= mode <= len(rows):
        raise ValidationFailed("mode", mode, f"must be 1 to {len(rows)}")
    row = rows[mode - 1]
    with envdata.core_errors(""):
        chk = core_modal.steinberg_check(
            row["fn_hz"], row["accel_rms_g"], board_edge_mm / 1e3, component_length_mm / 1e3,
            board_thickness_mm / 1e3, c=c, r=r)
    return {
        "estimate_id": est.id, "mode": mode, "fn_hz": row["fn_hz"],
        "response_grms": row["accel_rms_g"],
        "z_3sigma_mm": chk.z_3sigma_m * 1e3, "z_allow_mm": chk.z_allow_m * 1e3,
        "ratio": chk.ratio, "passes": chk.passes,
        "basis": "Steinberg, Vibration Analysis for Electronic Equipment, 3rd ed. (2000): "
                 "Z = 0.00022 B / (c h r sqrt(L)) in, about 2e7 reversals at 3 sigma "
                 "(constants from memory: verify against the book)",
    }
