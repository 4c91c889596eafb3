"""The loads package: a product's analysis levels as tables for a structural analyst,
with recommended solver settings and their basis.

Same revision and hash rules as the specifications (``planning.documents``): the
content is built from the database, its SHA-256 decides whether issuing makes a new
revision. Per axis and kind: random (ASD table), sine (amplitude table with
displacement, sweep rate, cycles near each mode), shock (SRS table with its Q) and
transient (the base acceleration history of a shock level, s and g with its sample rate:
the measured records it was derived from, or a history synthesised to its SRS). The
solver settings follow common practice and say so; the numbers they print come from
the level and, when the product has one, its latest modal summary.
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Any, Literal

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.dynamics import shock_synthesis as core_synth
from qualplan.dynamics import srs as core_srs
from qualplan.dynamics.units import G0_M_S2
from qualplan.planning import modal as pm
from qualplan.planning import wording
from qualplan.planning.catalog import get
from qualplan.planning.documents import (
    Content,
    HistoryRow,
    ProductInfo,
    _slug,
    _with_revision,
    content_hash,
)
from qualplan.planning.errors import ValidationFailed
from qualplan.planning.levels import staleness
from qualplan.store import models as m

AXIS_ORDER = {"X": 0, "Y": 1, "Z": 2, "all": 3}
KIND_ORDER = {"random": 0, "sine": 1, "shock": 2, "transient": 3}
#: Seed of the wavelet synthesis of a transient (the package is reproducible).
TRANSIENT_SEED = 0
#: Significant figures of a transient history's values (a stable content hash).
TRANSIENT_DIGITS = 6
#: Damping assumed when neither the level nor a modal summary gives one (common practice).
DEFAULT_Q = 10.0
CAUTION = ("These loads feed a structural analysis. The analysis, its model, damping and "
           "allowables, and the stresses it predicts must be reviewed and approved by a "
           "responsible engineer; the settings below are common practice, not a substitute "
           "for the analyst's judgement.")


class Setting(Content):
    setting: str
    value: str
    basis: str


class Fact(Content):
    label: str
    value: str


class LoadsSection(Content):
    level_id: int
    name: str
    number: int
    axis: str
    kind: Literal["random", "sine", "shock", "transient"]
    level_hash: str
    stale: list[str]
    columns: list[str]
    #: Column names of the CSV table (unit-suffixed, as the qualplan readers name them).
    keys: list[str]
    rows: list[list[float]]
    facts: list[Fact]
    settings: list[Setting]


class ModalInfo(Content):
    name: str
    revision: int
    content_hash: str
    modes: int
    highest_fn_hz: float
    lowest_fn_hz: float
    mass_fraction: dict[str, float | None]


class LoadsContent(Content):
    kind: Literal["loads"] = "loads"
    number: str
    revision: int
    title: str
    date: datetime
    program: str
    program_id: int
    product: ProductInfo
    axis: str | None
    caution: str
    modal: ModalInfo | None
    sections: list[LoadsSection]
    warnings: list[str]
    history: list[HistoryRow]
    input_hashes: dict[str, Any]

    @property
    def product_id(self) -> int:
        return self.product.id

    def content_hash(self) -> str:
        return content_hash(self)


def _g(x: float) -> str:
    return f"{x:.4g}"


def _modal_info(session: Session, product: m.Product) -> tuple[ModalInfo | None, Any]:
    revs = []
    for sm in pm.list_summaries(session, product.id):
        rev = pm.summary_revision(session, sm.id)
        revs.append((rev.created_at, rev.id, sm, rev))
    if not revs:
        return None, None
    _, _, sm, rev = max(revs, key=lambda t: (t[0], t[1]))
    modes = rev.spec["modes"]
    frac = {}
    for axis in ("X", "Y", "Z"):
        if product.mass_kg and all(axis in md["meff_kg"] for md in modes):
            frac[axis] = sum(md["meff_kg"][axis] for md in modes) / product.mass_kg
        else:
            frac[axis] = None
    return ModalInfo(name=sm.name, revision=rev.number, content_hash=rev.content_hash,
                     modes=len(modes), highest_fn_hz=max(md["fn_hz"] for md in modes),
                     lowest_fn_hz=min(md["fn_hz"] for md in modes), mass_fraction=frac), rev


def _points_per_octave(q: float) -> int:
    """Log spacing giving >= 5 points per half-power bandwidth fn/Q (ratio 1 + 1/(5Q))."""
    return math.ceil(math.log(2.0) / math.log(1.0 + 1.0 / (5.0 * q)))


def _half_power_cycles(fn_hz: float, zeta: float, rate_oct_per_min: float) -> float:
    """Cycles a log sweep spends in the half-power band fn/Q of a mode: 60 fn / (Q R ln 2)."""
    return 60.0 * fn_hz * 2.0 * zeta / (rate_oct_per_min * math.log(2.0))


def _settings(level: m.Level, curve: pm.LevelCurve, modal: ModalInfo | None, rev
              ) -> list[Setting]:
    f_lo, f_hi = curve.freq_hz[0], curve.freq_hz[-1]
    top = max(1.5 * f_hi, 1.5 * modal.highest_fn_hz if modal else 0.0)
    out = [Setting(
        setting="frequency range",
        value=f"{_g(min(f_lo, modal.lowest_fn_hz) if modal else f_lo)} to {_g(top)} Hz",
        basis="up to at least 1.5 x the highest input frequency"
              + (" or of the highest mode of the modal summary" if modal else "")
              + " (common practice)")]
    if curve.kind is m.EnvironmentKind.shock:
        q, q_basis = curve.q, "the Q the SRS is given at: the SRS is valid for this damping only"
    elif rev is not None:
        zs = [md["zeta"] for md in rev.spec["modes"]]
        q = 1.0 / (2.0 * max(zs))
        q_basis = (f"the modal summary's damping schedule, zeta {min(zs):.3g} to {max(zs):.3g}; "
                   "Q shown for the most damped mode")
    else:
        q = float(level.recipe.get("load_factor_q") or DEFAULT_Q)
        q_basis = "the level's Q (common practice Q = 10 absent test data)"
    out.append(Setting(setting="modal damping", value=f"Q = {_g(q)} (zeta = {1 / (2 * q):.3g})",
                       basis=q_basis))
    mass = (f"; the modal summary holds {100 * modal.mass_fraction[level.axis.value]:.1f} % "
            f"on {level.axis.value}" if modal and level.axis.value in modal.mass_fraction
            and modal.mass_fraction[level.axis.value] is not None else "")
    out.append(Setting(
        setting="modes to retain",
        value=f"up to {_g(1.5 * f_hi)} to {_g(2.0 * f_hi)} Hz and >= 90 % effective mass per axis",
        basis="1.5-2 x the input's upper frequency, >= 90 % effective mass (common practice)"
              + mass))
    if curve.kind in (m.EnvironmentKind.random, m.EnvironmentKind.sine):
        q_hi = 1.0 / (2.0 * min(md["zeta"] for md in rev.spec["modes"])) if rev else q
        out.append(Setting(
            setting="frequency points",
            value=f">= {_points_per_octave(q_hi)} per octave near each mode (log spacing "
                  f"ratio {1 + 1 / (5 * q_hi):.4f})",
            basis=f">= 5 points per half-power bandwidth fn/Q at Q = {_g(q_hi)} (common "
                  "practice)"))
    if curve.kind is m.EnvironmentKind.shock:
        low = modal.lowest_fn_hz if modal else f_lo
        out.append(Setting(
            setting="transient time step and end time",
            value=f"dt <= {1 / (10 * top):.3g} s; end >= the pulse length + "
                  f"{3 / low:.3g} to {5 / low:.3g} s",
            basis=f"dt <= 1/(10 f_max) at f_max = {_g(top)} Hz; 3-5 periods of the lowest "
                  f"{'mode' if modal else 'SRS frequency'} ({_g(low)} Hz) after the pulse, or "
                  "3-5 x the pulse length (common practice), when the history of the "
                  "transient section is run"))
    return out


def _section(session: Session, level: m.Level, modal: ModalInfo | None, rev) -> LoadsSection:
    curve = pm.level_curve(level)
    kind = curve.kind.value
    facts: list[Fact] = []
    f_lo, f_hi = curve.freq_hz[0], curve.freq_hz[-1]
    facts.append(Fact(label="band", value=f"{_g(f_lo)} to {_g(f_hi)} Hz"))
    if curve.margin_db is not None:
        facts.append(Fact(label="analysis margin", value=f"{curve.margin_db:+.3g} dB over the "
                          "limit level"))
    if curve.kind is m.EnvironmentKind.random:
        columns = ["frequency [Hz]", "ASD [g^2/Hz]"]
        keys = ["freq_hz", "asd_g2_hz"]
        rows = [[f, a] for f, a in zip(curve.freq_hz, curve.values, strict=True)]
        facts.append(Fact(label="overall", value=f"{wording.number(curve.grms)} g rms"))
        if curve.duration_s is not None:
            facts.append(Fact(label="duration", value=f"{wording.duration(curve.duration_s)} "
                              f"({curve.duration_basis})"))
    elif curve.kind is m.EnvironmentKind.sine:
        columns = ["frequency [Hz]", "acceleration [g peak]", "displacement [mm peak]"]
        keys = ["freq_hz", "accel_g", "displacement_mm"]
        rows = [[f, a, a * G0_M_S2 / (2 * math.pi * f) ** 2 * 1e3]
                for f, a in zip(curve.freq_hz, curve.values, strict=True)]
        rate = curve.sweep_rate_oct_per_min
        if rate:
            facts.append(Fact(label="sweep rate", value=f"{wording.number(rate)} oct/min (log)"))
            if curve.sweep_time_s:
                facts.append(Fact(label="sweep time", value=f"{curve.sweep_time_s:.1f} s"))
            if rev is not None:
                cyc = [f"{md['fn_hz']:.4g} Hz: "
                       f"{_half_power_cycles(md['fn_hz'], md['zeta'], rate):.0f}"
                       for md in rev.spec["modes"] if f_lo <= md["fn_hz"] <= f_hi]
                if cyc:
                    facts.append(Fact(label="cycles in the half-power band per sweep "
                                      "(60 fn / (Q R ln 2))", value="; ".join(cyc)))
            else:
                facts.append(Fact(label="cycles in the half-power band per sweep",
                                  value=f"60 fn / (Q R ln 2) = "
                                        f"{_half_power_cycles(1.0, 0.5 / DEFAULT_Q, rate):.3g}"
                                        f" x fn [Hz] at Q = {DEFAULT_Q:g}"))
    else:
        columns = ["natural frequency [Hz]", "SRS [g]"]
        keys = ["freq_hz", "accel_g"]
        rows = [[f, a] for f, a in zip(curve.freq_hz, curve.values, strict=True)]
        facts.append(Fact(label="spectrum", value=f"maximax absolute acceleration SRS, Q = "
                          f"{curve.q:g}, valid for damping zeta = {1 / (2 * curve.q):.3g}"))
    return LoadsSection(
        level_id=level.id, name=level.name, number=level.number, axis=level.axis.value,
        kind=kind, level_hash=level.level_hash, stale=staleness(session, level),
        columns=columns, keys=keys, rows=rows, facts=facts,
        settings=_settings(level, curve, modal, rev))


def _sig(x: np.ndarray, digits: int = TRANSIENT_DIGITS) -> list[float]:
    return [float(f"{v:.{digits}g}") for v in np.asarray(x, dtype=float)]


def _transient_settings(curve: pm.LevelCurve, modal: ModalInfo | None, dt_s: float,
                        length_s: float) -> list[Setting]:
    """Time step and end time of a transient run of a base acceleration history."""
    f_hi = curve.freq_hz[-1]
    top = max(1.5 * f_hi, 1.5 * modal.highest_fn_hz if modal else 0.0)
    low = modal.lowest_fn_hz if modal else curve.freq_hz[0]
    step = min(dt_s, 1.0 / (10.0 * top))
    tail_lo, tail_hi = max(3.0 / low, 3.0 * length_s), max(5.0 / low, 5.0 * length_s)
    return [
        Setting(setting="time step",
                value=f"dt <= {step:.3g} s (the history is sampled at {dt_s:.3g} s"
                      + ("; interpolate it linearly between samples)" if step < dt_s else ")"),
                basis=f"dt <= 1/(10 f_max) at f_max = {_g(top)} Hz, and no coarser than the "
                      "history's own sampling (common practice)"),
        Setting(setting="end time",
                value=f"{length_s + tail_lo:.3g} to {length_s + tail_hi:.3g} s",
                basis=f"the history's length {length_s:.4g} s plus the larger of 3-5 periods "
                      f"of the lowest {'mode' if modal else 'SRS frequency'} ({_g(low)} Hz) and "
                      "3-5 x the pulse length, for the free decay (common practice)"),
        Setting(setting="modal damping",
                value=f"Q = {_g(curve.q or DEFAULT_Q)}",
                basis="the Q the SRS is given at; a different damping changes the response "
                      "the history produces"),
    ]


def _transient_section(session: Session, level: m.Level, curve: pm.LevelCurve, *,
                       label: str, accel_g: np.ndarray, dt_s: float, facts: list[Fact],
                       modal: ModalInfo | None) -> LoadsSection:
    t = np.arange(accel_g.size) * dt_s
    length = float(t[-1]) if t.size else 0.0
    # 6 figures: the analyst sets the solver's time step from it
    rate = f"{1.0 / dt_s:.6g} Hz (dt = {dt_s:.6g} s)"
    peak = wording.number(float(np.max(np.abs(accel_g))))
    facts = [Fact(label="history", value=label),
             Fact(label="sample rate", value=rate),
             Fact(label="samples", value=f"{accel_g.size} over {wording.duration(length)}"),
             Fact(label="peak acceleration", value=f"{peak} g"),
             *facts]
    return LoadsSection(
        level_id=level.id, name=level.name, number=level.number, axis=level.axis.value,
        kind="transient", level_hash=level.level_hash, stale=staleness(session, level),
        columns=["time [s]", "base acceleration [g]"], keys=["time_s", "accel_g"],
        rows=[[a, b] for a, b in zip(_sig(t, 9), _sig(accel_g), strict=True)], facts=facts,
        settings=_transient_settings(curve, modal, dt_s, length))


def _transients(session: Session, level: m.Level, modal: ModalInfo | None
                ) -> list[LoadsSection]:
    """The transient sections of a shock analysis level: a base acceleration history
    synthesised to its SRS (wavelets, Yang & Saffell 1972, as in IEST-RP-DTE032), then
    the measured histories it was derived from (scaled by its analysis margin)."""
    curve = pm.level_curve(level)
    factor = 10.0 ** ((curve.margin_db or 0.0) / 20.0)
    out = []
    for rid in level.recipe.get("revision_ids") or []:
        rev = session.get(m.EnvironmentRevision, rid)
        if rev is None or rev.environment.kind is not m.EnvironmentKind.time_history:
            continue
        x = np.asarray(rev.data, dtype=float) * factor
        scale = (f"the measured record x {factor:.4g} (the level's {curve.margin_db:+.3g} dB "
                 "analysis margin)" if curve.margin_db else "the measured record, unscaled")
        scale += ("; one input of the level: its SRS lies below the level where the "
                  "combination of the inputs raised it (the synthesised history matches the "
                  "level)")
        out.append(_transient_section(
            session, level, curve, modal=modal, accel_g=x, dt_s=float(rev.spec["dt_s"]),
            label=f"measured: {rev.environment.name} revision {rev.number}",
            facts=[Fact(label="values", value=scale)]))
    syn = core_synth.synthesize_shock(core_srs.SrsProfile(curve.freq_hz, curve.values),
                                      q=float(curve.q or DEFAULT_Q), seed=TRANSIENT_SEED)
    facts = [
        Fact(label="method", value=f"wavelet synthesis to the level's SRS (Yang & Saffell "
             f"1972; IEST-RP-DTE032), seed {TRANSIENT_SEED}; one history of many with this "
             "SRS: the analyst may run more than one"),
        Fact(label="SRS match", value=f"within {syn.max_error_db:.2f} dB of the level at Q = "
             f"{syn.q:g} ({'converged' if syn.converged else 'NOT converged'} to "
             f"+/-{syn.tolerance_db:g} dB)"),
        Fact(label="end of record", value=f"velocity {syn.final_velocity_m_s:.3g} m/s, "
             f"displacement {syn.final_displacement_m * 1e3:.3g} mm; peak displacement "
             f"{syn.peak_displacement_m * 1e3:.3g} mm"),
    ]
    return [_transient_section(session, level, curve, modal=modal, accel_g=syn.accel_g,
                               dt_s=syn.dt_s, label="synthesised to the level's SRS",
                               facts=facts), *out]


def loads_content(session: Session, product_id: int, *, axis: m.Axis | None = None,
                  level_ids: list[int] | None = None, number: str | None = None,
                  note: str = "") -> LoadsContent:
    """The loads package of a product: its newest analysis levels (or the chosen ones)."""
    product = get(session, m.Product, product_id, "product")
    if level_ids:
        chosen = [get(session, m.Level, i, "level") for i in level_ids]
        for lv in chosen:
            if lv.product_id != product.id or lv.purpose is not m.LevelPurpose.analysis:
                raise ValidationFailed("levels", lv.id, "must be analysis levels of the product")
    else:
        newest: dict[str, m.Level] = {}
        for lv in session.scalars(select(m.Level).where(m.Level.product_id == product.id)):
            if lv.purpose is m.LevelPurpose.analysis and (
                    lv.name not in newest or lv.number > newest[lv.name].number):
                newest[lv.name] = lv
        chosen = list(newest.values())
    if axis is not None:
        chosen = [lv for lv in chosen if lv.axis in (axis, m.Axis.all)]
    if not chosen:
        raise ValidationFailed("product", product.name, "has no analysis level"
                               + (f" on axis {axis.value}" if axis else "")
                               + ": derive one with purpose 'analysis' first")
    chosen.sort(key=lambda x: (AXIS_ORDER[x.axis.value], KIND_ORDER[x.kind.value], x.name))
    modal, rev = _modal_info(session, product)
    sections = [_section(session, lv, modal, rev) for lv in chosen]
    sections += [tr for lv in chosen if lv.kind is m.EnvironmentKind.shock
                 for tr in _transients(session, lv, modal)]
    sections.sort(key=lambda x: (AXIS_ORDER[x.axis], KIND_ORDER[x.kind], x.name))
    warnings_synth = [f"{sec.name} #{sec.number}: the synthesised transient did not converge "
                      "to the SRS; see its SRS match" for sec in sections
                      if sec.kind == "transient" and any("NOT converged" in f.value
                                                         for f in sec.facts)]
    warnings = [f"{sec.name} #{sec.number} is STALE: {r}" for sec in sections
                if sec.kind != "transient" for r in sec.stale] + warnings_synth
    if modal is None:
        warnings.append("no modal summary for this product: damping, mode range and the "
                        "cycles near each mode use common-practice values")
    program = product.program
    ax = f"-{axis.value}" if axis else ""
    number = number or f"ALP-{_slug(product.part_number or product.name)}{ax}"
    dates = [lv.created_at for lv in chosen]
    if rev is not None:
        dates.append(rev.created_at)
    body = {
        "number": number,
        "date": max(dates),
        "title": f"Analysis loads package: {product.name}"
                 + (f", axis {axis.value}" if axis else ""),
        "program": program.name,
        "program_id": program.id,
        "product": ProductInfo(id=product.id, name=product.name, part_number=product.part_number,
                               mass_kg=product.mass_kg, parents=[]),
        "axis": axis.value if axis else None,
        "caution": CAUTION,
        "modal": modal,
        "sections": sections,
        "warnings": warnings,
        "input_hashes": {
            "levels": {str(lv.id): lv.level_hash for lv in chosen},
            "modal_revision": {str(rev.id): rev.content_hash} if rev is not None else {},
        },
    }
    return _with_revision(session, number, body, LoadsContent, note)
