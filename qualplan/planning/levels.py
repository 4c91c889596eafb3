"""Derive test and analysis levels from environment revisions, and keep them honest.

A level stores its recipe, its result and the content hash of every input (the
environment revisions it was made from, the life cycle it was checked against, and
the margin policy's rules). Levels are immutable: deriving again makes the next
number. A level whose inputs have changed since is *stale*, never silently different.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from qualplan.dynamics import equivalence as core_eq
from qualplan.dynamics import psd as core_psd
from qualplan.dynamics import sdof as core_sdof
from qualplan.dynamics import signal as core_signal
from qualplan.dynamics import sine as core_sine
from qualplan.dynamics import srs as core_srs
from qualplan.dynamics import stats as core_stats
from qualplan.dynamics.errors import AccuracyWarning
from qualplan.dynamics.units import from_db_amplitude
from qualplan.planning import coverage as cov
from qualplan.planning import envdata
from qualplan.planning import results as r
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require_for
from qualplan.planning.catalog import get
from qualplan.planning.errors import Conflict, ValidationFailed
from qualplan.planning.lifecycle import (
    LifeItem,
    check_exposure,
    exposure,
    exposure_s,
    life_cycle,
    lineage,
)
from qualplan.planning.policies import rules_of
from qualplan.planning.transfers import derivation_staleness
from qualplan.planning.withdrawals import (
    describe,
    environment_withdrawal,
    level_withdrawal,
    superseded_by,
    withdrawn_environment_ids,
)
from qualplan.store import models as m
from qualplan.store.hashing import json_hash
from qualplan.store.repositories import LevelRepository, RevisionRepository

K = m.EnvironmentKind


#: Lines of the record analysis below the lowest natural frequency of interest (rule of
#: this project, docs/methods/exposure.md: a mode at f_lo is seen by 4 lines).
LINES_BELOW_FN = 4
#: Records are analysed up to this fraction of the sample rate (anti-alias roll-off above).
RECORD_BAND_FRACTION = 0.4

#: One environment revision chosen for a level, with its environment.
Input = LifeItem


def _inputs(session: Session, recipe: s.LevelRecipe, product: m.Product) -> list[Input]:
    allowed_products = set(lineage(session, product))
    out = []
    for i, rid in enumerate(recipe.revision_ids):
        rev = get(session, m.EnvironmentRevision, rid, "environment revision")
        env = rev.environment
        field = f"revision_ids[{i}]"
        if (w := environment_withdrawal(session, env.id)) is not None:
            raise ValidationFailed(field, rid, f"environment {env.name!r} is {describe(w)}")
        if env.product_id not in allowed_products:
            raise ValidationFailed(
                field,
                rid,
                f"environment {env.name!r} belongs to another "
                "product (not this one or one of its parents)",
            )
        if env.axis not in (recipe.axis, m.Axis.all) and recipe.axis is not m.Axis.all:
            raise ValidationFailed(
                field,
                rid,
                f"environment {env.name!r} is on axis "
                f"{env.axis.value}, the level on {recipe.axis.value}",
            )
        usable = {
            "random": (K.random, K.time_history),
            "shock": (K.shock, K.time_history),
            "sine": (K.sine,),
        }[recipe.kind]
        if recipe.combination == "fds_equivalent":
            usable = tuple(K)  # the damage of any kind of environment can be matched
        if env.kind not in usable:
            raise ValidationFailed(
                field, rid, f"a {env.kind.value} environment cannot make a {recipe.kind} level"
            )
        item = Input(env, rev)
        check_exposure(item, field)
        out.append(item)
    return out


# --- combination ----------------------------------------------------------------------


def analysis_settings(opts: s.RecordAnalysis, f_lo_hz: float, record_s: float, label: str
                      ) -> dict[str, Any]:
    """Welch / maximax settings for one record: the recipe's, or defaults that resolve
    the lowest natural frequency of interest `f_lo_hz` with LINES_BELOW_FN lines.

    Refuses (naming the record length needed) a record shorter than one segment, and a
    chosen resolution too coarse for `f_lo_hz`."""
    need_df = f_lo_hz / LINES_BELOW_FN
    if opts.segment_s is not None:
        df, chosen = 1.0 / opts.segment_s, "segment_s"
    elif opts.resolution_hz is not None:
        df, chosen = opts.resolution_hz, "resolution_hz"
    else:
        df, chosen = need_df, None
    if chosen and df > need_df * (1 + 1e-9):
        raise ValidationFailed(
            f"analysis.{chosen}", getattr(opts, chosen),
            f"gives {df:.4g} Hz lines: fewer than {LINES_BELOW_FN} lines below the lowest "
            f"natural frequency of interest {f_lo_hz:g} Hz (needs <= {need_df:.4g} Hz, a "
            f"segment of >= {1 / need_df:.4g} s)")
    segment_s = 1.0 / df
    if record_s < segment_s * (1 - 1e-9):
        raise ValidationFailed(
            "revision_ids", f"{label}: {record_s:.4g} s",
            f"record is shorter than one analysis segment: {LINES_BELOW_FN} lines below "
            f"{f_lo_hz:g} Hz need {df:.4g} Hz lines, a record of at least {segment_s:.4g} s")
    window_s = opts.maximax_window_s or max(1.0, 4 * segment_s)
    if window_s < segment_s:
        raise ValidationFailed("analysis.maximax_window_s", window_s,
                               f"must hold at least one segment of {segment_s:.4g} s")
    return {"window": opts.window, "resolution_hz": df, "segment_s": segment_s,
            "overlap": opts.overlap, "maximax_window_s": min(window_s, record_s),
            "defaults": chosen is None}


def _record_curve(item: Input, x: np.ndarray, dt: float, band_hz: tuple[float, float],
                  opts: s.RecordAnalysis, steps: list[r.Step] | None, run: str = ""):
    """Maximax PSD of one record (run) inside `band_hz`, below 0.4 of its sample rate."""
    label = item.label + run
    cfg = analysis_settings(opts, band_hz[0], x.size * dt, label)
    est = core_signal.maximax_psd(
        x, 1.0 / dt, window_s=cfg["maximax_window_s"], resolution_hz=cfg["resolution_hz"],
        overlap=cfg["overlap"], window=cfg["window"])
    if steps is not None:
        steps.append(_step(
            "record analysis", inputs=[label], window=cfg["window"],
            resolution_hz=float(est.resolution_hz), segment_s=cfg["segment_s"],
            overlap=cfg["overlap"], maximax_window_s=float(est.window_s),
            windows=int(est.n_windows), dof=float(est.dof),
            settings="defaults (resolve the lowest fn of interest with "
            f"{LINES_BELOW_FN} lines)" if cfg["defaults"] else "chosen",
            method="maximax PSD of Welch averages (NASA-HDBK-7005)"))
    hi = min(band_hz[1], RECORD_BAND_FRACTION / dt)
    keep = (est.freq_hz >= band_hz[0]) & (est.freq_hz <= hi) & (est.asd_g2_hz > 0)
    if keep.sum() < 2:
        raise ValidationFailed("revision_ids", item.revision.id,
                               f"record {label} has no PSD line in "
                               f"{band_hz[0]:g}-{hi:g} Hz")
    return est.freq_hz[keep], est.asd_g2_hz[keep]


def _random_curves(inputs: list[Input], band_hz: tuple[float, float],
                   opts: s.RecordAnalysis | None = None, steps: list[r.Step] | None = None,
                   combination: str = "envelope") -> list[tuple[np.ndarray, np.ndarray]]:
    """One PSD curve per input; a record's is its maximax PSD (``_record_curve``). An
    input holding several runs of its condition gives the envelope or P95/50
    (`combination`) across its runs: the runs are samples of one condition."""
    curves = []
    opts = opts or s.RecordAnalysis()
    for item in inputs:
        rev = item.revision
        runs = envdata.runs_of(rev.spec, rev.data)
        if item.environment.kind is K.random:
            run_curves = runs
        else:
            dt = rev.spec["dt_s"]
            run_curves = [_record_curve(item, x, dt, band_hz, opts, steps,
                                        f" run {k + 1}" if len(runs) > 1 else "")
                          for k, x in enumerate(runs)]
        if len(run_curves) == 1:
            curves.append(run_curves[0])
            continue
        f, a, step = _combine(run_curves, combination, [item.label])
        curves.append((f, a))
        if steps is not None:
            steps.append(step.model_copy(update={
                "step": f"{step.step} across {len(run_curves)} runs of one condition"}))
    return curves


def _shock_curves(inputs: list[Input], q: float,
                  steps: list[r.Step] | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
    curves = []
    for item in inputs:
        spec = item.revision.spec
        if item.environment.kind is K.shock:
            if abs(spec["q"] - q) > 1e-9:
                raise ValidationFailed(
                    "revision_ids",
                    item.revision.id,
                    f"SRS {item.label} is at Q = {spec['q']:g}, the policy asks Q = {q:g}",
                )
            curves.append((np.asarray(spec["freq_hz"]), np.asarray(spec["accel_g"])))
        else:
            x, dt = np.asarray(item.revision.data), float(spec["dt_s"])
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always", AccuracyWarning)
                grid, values = envdata.record_srs(x, dt, q)
            notes = [str(c.message) for c in caught if issubclass(c.category, AccuracyWarning)]
            curves.append((grid, values))
            if steps is not None:
                steps.append(_step(
                    "SRS of the record", inputs=[item.label],
                    method="band-limited input model (FFT reconstruction where "
                           "fn > fs/20), peaks between samples (Smallwood 1981 filter; "
                           "ISO 18431-4)",
                    q=q, f_lo_hz=float(grid[0]), f_hi_hz=float(grid[-1]),
                    sample_rate_hz=1.0 / dt, accuracy_notes=notes))
    return curves


def _statistical(curves, power: bool) -> tuple[np.ndarray, np.ndarray, dict[str, Any]]:
    """P95/50 of several spectra on their common band (1/24-octave grid)."""
    if len(curves) < 2:
        raise ValidationFailed("combination", "p95_50", "needs at least 2 measured spectra")
    lo = max(c[0][0] for c in curves)
    hi = min(c[0][-1] for c in curves)
    if lo >= hi:
        raise ValidationFailed("revision_ids", "spectra", "the spectra share no frequency band")
    grid = core_srs.octave_grid(lo, hi, 24)
    grid = np.unique(np.clip(grid, lo, hi))
    values = np.vstack([np.interp(np.log(grid), np.log(f), np.log(v)) for f, v in curves])
    limits = core_stats.log_tolerance_limits(np.exp(values))
    info = {
        "n": limits.n,
        "k_factor": limits.k_factor,
        "method": "normal tolerance limit on log10 values, 95 % coverage, 50 % "
        "confidence (NASA-HDBK-7005)",
    }
    return grid, np.asarray(limits.upper), info


def _simplified(freq, values, max_points: int, *, power: bool):
    """Conservative simplification (never below the input at any input frequency).

    Returns the breakpoints and the excess in dB: on the g rms for a PSD; for an SRS
    (simplified as its square, then the root taken) on the rms of the SRS over frequency.
    """
    if len(freq) <= max_points:
        return np.asarray(freq), np.asarray(values), 0.0
    work = values if power else np.asarray(values) ** 2
    res = core_psd.simplify_report(freq, work, max_points)
    if power:
        return res.freq_hz, res.asd_g2_hz, res.excess_db
    return res.freq_hz, np.sqrt(res.asd_g2_hz), res.excess_db / 2


def _step(step: str, **fields: Any) -> r.Step:
    """A derivation step; keywords other than Step's own fields are its values."""
    own = {k: fields.pop(k) for k in ("inputs", "db", "basis", "method") if k in fields}
    return r.Step(step=step, **own, values=fields)


def controllable_smoothing(f, a, control: s.ControlRule) -> np.ndarray:
    """Raise a random level onto breakpoints a vibration controller can follow.

    Each breakpoint becomes the highest of: itself; every other breakpoint lowered along
    the policy's steepest slope (a cone of +/- S dB/oct in log-log, so no slope between
    breakpoints exceeds S); the highest ASD less the dynamic range limit; the floor. The
    breakpoints are kept, only raised, so the level (straight in log-log between them)
    is never below the input at any frequency. [Hz, g^2/Hz]
    """
    f, a = np.asarray(f, float), np.asarray(a, float)
    octave = np.log2(f)
    db = 10 * np.log10(a)
    cone = db[None, :] - control.max_slope_db_per_oct * np.abs(octave[:, None] - octave[None, :])
    db = cone.max(axis=1)
    db = np.maximum(db, db.max() - control.max_dynamic_range_db)
    db = np.maximum(db, 10 * np.log10(control.floor_g2_hz))
    return np.maximum(10 ** (db / 10), a)


#: Breakpoints closer than this [octave] are one breakpoint to a controller (our rule:
#: 1/1000 octave is 0.07 % in frequency, below any analysis line of a test level).
DEGENERATE_OCT = 1e-3


def merge_close_breakpoints(f, a, min_octave: float = DEGENERATE_OCT,
                            max_raise_db: float = 0.1) -> tuple[np.ndarray, np.ndarray]:
    """Drop the breakpoints that lie within ``min_octave`` of a neighbour and under the
    straight log-log line of their two neighbours by at most ``max_raise_db`` (an
    envelope's edge step of a few hundredths of a dB leaves two breakpoints micro-hertz
    apart). A dropped breakpoint is a valley of the level, so the level between its
    neighbours only rises (never below the input; by at most ``max_raise_db``, at the
    dropped breakpoint) and the slope of the new segment lies between the two it
    replaces (the controllability limits still hold). The foot of a steep rise is kept.
    [Hz, g^2/Hz]"""
    f, a = np.asarray(f, float), np.asarray(a, float)
    while f.size > 2:
        lf, la = np.log2(f), np.log10(a)
        gaps = np.diff(lf)
        dropped = False
        for i in range(1, f.size - 1):
            if min(gaps[i - 1], gaps[i]) >= min_octave:
                continue
            t = (lf[i] - lf[i - 1]) / (lf[i + 1] - lf[i - 1])
            raise_db = 10 * (la[i - 1] + t * (la[i + 1] - la[i - 1]) - la[i])
            if 0 <= raise_db <= max_raise_db:
                f, a = np.delete(f, i), np.delete(a, i)
                dropped = True
                break
        if not dropped:
            break
    return f, a


def _random_verdicts(f, a, control: s.ControlRule, reasons: list[str]
                     ) -> tuple[bool, list[str]]:
    """Controllability of a random test level against the policy's control rules."""
    out = list(reasons)
    slopes = core_psd.slopes_db_per_oct(f, a)
    limit = control.max_slope_db_per_oct
    steep = np.abs(slopes) > limit * (1 + 1e-6)
    if steep.any():
        i = int(np.argmax(np.abs(slopes)))
        out.append(f"not controllable: slope {slopes[i]:+.1f} dB/oct between {f[i]:.4g} and "
                   f"{f[i + 1]:.4g} Hz (limit +/-{limit:g} dB/oct)")
    span = 10 * np.log10(np.max(a) / np.min(a))
    wide = span > control.max_dynamic_range_db * (1 + 1e-6)
    if wide:
        out.append(f"not controllable: ASD spans {span:.1f} dB (limit "
                   f"{control.max_dynamic_range_db:g} dB)")
    low = np.min(a) < control.floor_g2_hz * (1 - 1e-6)
    if low:
        out.append(f"not controllable: ASD {np.min(a):.3g} g^2/Hz below the floor "
                   f"{control.floor_g2_hz:.3g} g^2/Hz")
    return not (steep.any() or wide or low), out


def _combine(curves, combination: str, labels: list[str]):
    """Maximum envelope or P95/50 of PSD curves, with its derivation step."""
    if combination == "envelope":
        f, a = core_psd.envelope(curves) if len(curves) > 1 else curves[0]
        return np.asarray(f), np.asarray(a), _step("maximum envelope", inputs=labels)
    f, a, info = _statistical(curves, power=True)
    return f, a, _step("P95/50", inputs=labels, **info)


def _input_compression(item: Input, rule: s.RandomRule) -> dict[str, Any] | None:
    """Inverse-power-law increase bringing one input from its own exposure to the test
    duration (MIL-STD-810H Method 514.8 Annex A), or None when it lasts no longer."""
    life = exposure_s(item)
    t = rule.duration_s
    if life <= t:
        return None
    return {"inputs": [item.label],
            "db": float(10 * np.log10((life / t) ** (2.0 / rule.compression_exponent))),
            "life_s": life, "test_s": t, "exponent": rule.compression_exponent,
            "method": "inverse power law, W2/W1 = (T1/T2)^(2/m) "
                      "(MIL-STD-810H Method 514.8 Annex A)"}


def _load_factor(f, a, fn: float, q: float) -> r.LoadFactor:
    """Equivalent-static load factor: 3 x the exact SDOF absolute-acceleration rms
    (integral of |H|^2 W over the level), Miles' equation beside it (Miles 1954)."""
    g_fn = float(core_psd.asd_at(f, a, fn))
    miles = float(core_sdof.miles_grms(fn, q, g_fn))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        exact = float(core_sdof.response_rms(f, a, [fn], q, output="abs_accel")[0])
    return r.LoadFactor(
        fn_hz=fn, q=q, asd_at_fn_g2_hz=g_fn, miles_grms=miles, exact_grms=exact,
        three_sigma_g=3 * exact, miles_difference_pct=100 * (miles - exact) / exact,
        method="3 sigma of the exact SDOF absolute-acceleration response (integral of "
               "|H|^2 W over the level); Miles' equation (1954) shown as the approximation")


def derive_random(
    recipe: s.LevelRecipe, rules: s.PolicyRules, inputs: list[Input], life_s: float,
    cache: cov.SpectraCache | None = None,
) -> r.RandomResult:
    eq = rules.equivalence
    steps: list[r.Step] = []
    equivalent = recipe.combination == "fds_equivalent"
    test = recipe.purpose is m.LevelPurpose.test
    rule = rules.random[recipe.grade]
    reasons: list[str] = []
    per_input = test and bool(rule.compression_exponent and rule.duration_s)
    compressed_any = False
    if equivalent:
        if not test:
            raise ValidationFailed("combination", recipe.combination,
                                   "makes test levels (it needs a test duration)")
        test_s = rule.duration_s or life_s
        f, a, info = _fds_equivalent(inputs, rules, test_s, cache)
        steps.append(_step("FDS equivalence", **info))
        lf, la = f, a
    else:
        labels = [i.label for i in inputs]
        curves = _random_curves(inputs, (eq.f_lo_hz, eq.f_hi_hz), recipe.analysis, steps,
                                recipe.combination)
        across = recipe.combination
        if len(curves) == 1 and len(envdata.runs_of(inputs[0].revision.spec,
                                                    inputs[0].revision.data)) > 1:
            across = "envelope"  # the statistics went across the one input's runs
        lf, la, step = _combine(curves, across, labels)
        if per_input:
            scaled = []
            for item, (cf, ca) in zip(inputs, curves, strict=True):
                comp = _input_compression(item, rule)
                if comp is not None:
                    compressed_any = True
                    steps.append(_step("time compression", **comp))
                    ca = core_psd.scale_db(cf, ca, comp["db"])[1]
                scaled.append((cf, ca))
            f, a, step = _combine(scaled, across, labels)
        else:
            f, a = lf, la
        steps.append(step)
        lf, la, _ = _simplified(lf, la, recipe.max_breakpoints, power=True)
    f, a, excess = _simplified(f, a, recipe.max_breakpoints, power=True)
    limit = r.RandomLimit(freq_hz=list(map(float, lf)), asd_g2_hz=list(map(float, la)),
                          grms=core_psd.grms(lf, la))
    steps.append(_step("conservative simplification", max_breakpoints=recipe.max_breakpoints,
                       excess_db=excess))
    if not test:
        margin = rules.analysis.margin_db
        f, a = core_psd.scale_db(f, a, margin)
        steps.append(_step("analysis margin", db=margin, basis=rules.analysis.basis))
        load_factor = None
        if recipe.load_factor_fn_hz:
            load_factor = _load_factor(f, a, recipe.load_factor_fn_hz, recipe.load_factor_q)
        return r.RandomResult(
            freq_hz=list(map(float, f)), asd_g2_hz=list(map(float, a)),
            grms=core_psd.grms(f, a), slopes_db_per_oct=core_psd.slopes_db_per_oct(f, a).tolist(),
            limit=limit, steps=steps, life_exposure_s=life_s, load_factor=load_factor,
            verdicts=r.Verdicts(converged=True, controllable=None, reasons=reasons),
        )
    f, a = core_psd.scale_db(f, a, rule.margin_db)
    steps.append(_step("margin", db=rule.margin_db, basis=rule.basis))
    if equivalent:  # the FDS inversion already brought the life into the test duration
        duration = rule.duration_s or life_s
    elif per_input:
        duration = (rule.duration_s if compressed_any
                    else max(exposure_s(i) for i in inputs))
    else:
        duration, _ = _random_duration(rule, life_s)
    if rule.minimum_profile:
        mf, ma = rule.minimum_profile["freq_hz"], rule.minimum_profile["asd_g2_hz"]
        floor_grms = core_psd.grms(mf, ma)
        ef, ea = core_psd.envelope([(f, a), (mf, ma)])
        raised = not np.allclose(core_psd.asd_at(ef, ea, ef), core_psd.asd_at(f, a, ef))
        if raised:
            f, a, _ = _simplified(ef, ea, recipe.max_breakpoints, power=True)
        steps.append(_step("minimum level", floor_grms=floor_grms, raised=bool(raised)))
    f, a = np.asarray(f, float), np.asarray(a, float)
    ok, why = _random_verdicts(f, a, rules.control, [])
    if not ok:
        smooth = controllable_smoothing(f, a, rules.control)
        g0, g1 = core_psd.grms(f, a), core_psd.grms(f, smooth)
        ctl = rules.control
        steps.append(_step(
            "controllable smoothing", db=float(20 * np.log10(g1 / g0)),
            found=why, raised_breakpoints=int(np.sum(smooth > a * (1 + 1e-9))),
            largest_raise_db=float(np.max(10 * np.log10(smooth / a))),
            max_slope_db_per_oct=ctl.max_slope_db_per_oct,
            max_dynamic_range_db=ctl.max_dynamic_range_db, floor_g2_hz=ctl.floor_g2_hz,
            basis=ctl.basis,
            method="breakpoints raised (never lowered) onto the policy's slope, dynamic "
                   "range and floor limits; dB: excess on g rms"))
        a = smooth
    mf, ma = merge_close_breakpoints(f, a)
    if mf.size < f.size:
        g0, g1 = core_psd.grms(f, a), core_psd.grms(mf, ma)
        steps.append(_step(
            "close breakpoints merged", db=float(20 * np.log10(g1 / g0)),
            merged=int(f.size - mf.size), within_octave=DEGENERATE_OCT,
            method="a breakpoint within 1/1000 octave of a neighbour and at most 0.1 dB "
                   "under the line of its neighbours is dropped (the level only rises); "
                   "dB: on g rms"))
        f, a = mf, ma
    controllable, reasons = _random_verdicts(f, a, rules.control, reasons)
    d = core_psd.shaker_demand(f, a)
    return r.RandomResult(
        freq_hz=f.tolist(), asd_g2_hz=a.tolist(), grms=core_psd.grms(f, a),
        slopes_db_per_oct=core_psd.slopes_db_per_oct(f, a).tolist(), duration_s=duration,
        tolerance_db=rule.tolerance_db, grms_tolerance_pct=rule.grms_tolerance_pct,
        duration_tolerance_pct=rule.duration_tolerance_pct,
        shaker=r.Shaker(velocity_rms_m_s=d.velocity_rms_m_s,
                        displacement_rms_m=d.displacement_rms_m,
                        displacement_peak_m=d.displacement_peak_m,
                        displacement_pk_pk_m=d.displacement_pk_pk_m),
        limit=limit, steps=steps, life_exposure_s=life_s,
        tolerance_band=r.random_band(f, a, rule.tolerance_db),
        verdicts=r.Verdicts(converged=True, controllable=controllable, reasons=reasons),
    )


def _input_band(item: Input) -> tuple[float, float]:
    """Frequency band an input carries content in [Hz]."""
    spec, kind = item.revision.spec, item.environment.kind
    if kind in (K.random, K.shock):
        return spec["freq_hz"][0], spec["freq_hz"][-1]
    if kind is K.sine:
        sine = envdata.sine_spec_of(spec)
        return sine.f_lo_hz, sine.f_hi_hz
    return 0.0, cov.RECORD_FN_MAX / spec["dt_s"]


def _fds_equivalent(inputs: list[Input], rules: s.PolicyRules, test_s: float,
                    cache: cov.SpectraCache | None = None):
    """The PSD that does, in `test_s`, the damage of the inputs over their exposures.

    Natural frequencies: the policy's grid on the union of the inputs' bands, clipped to
    the policy's band. Per Basquin exponent b of the policy: life FDS = Miner sum of the
    inputs' FDS, then the closed-form narrow-band inversion refined by Newton steps on
    the exact FDS (equivalence.random_test_for_fds; Lalanne vol. 5, Henderson & Piersol
    1995); the PSDs of the several b are enveloped, so the test covers the damage for
    each of them. The PSD spans the band (the union clipped to the policy's band): its
    values at the first and last fn are held flat out to the band's edges, where the
    grid does not reach them (the inputs' content there excites the edge oscillators
    too). Refuses (nothing is stored) when the inversion misses the tolerance at any fn.
    """
    eq = rules.equivalence
    grid = core_srs.octave_grid(eq.f_lo_hz, eq.f_hi_hz, eq.points_per_octave)
    bands = [_input_band(i) for i in inputs]
    inside = np.any([(grid >= lo * (1 - 1e-9)) & (grid <= hi * (1 + 1e-9))
                     for lo, hi in bands], axis=0)
    fn = grid[inside]
    if fn.size < 2:
        raise ValidationFailed("revision_ids", [i.revision.id for i in inputs],
                               f"the environments carry no content on the policy's band "
                               f"{eq.f_lo_hz:g}-{eq.f_hi_hz:g} Hz")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        parts = [cov.spectra_of_environment(i, fn, eq.q, eq.b, cache) for i in inputs]
        life = {b: np.sum([p.fds[b] for p in parts], axis=0) for b in eq.b}
        keep = np.all([life[b] > 0 for b in eq.b], axis=0)
        if keep.sum() < 2:
            raise ValidationFailed("revision_ids", [i.revision.id for i in inputs],
                                   "the environments do no damage on the policy's "
                                   "natural-frequency band")
        # the band the level spans: the union of the inputs' bands clipped to the policy's
        band = (min(max(eq.f_lo_hz, min(lo for lo, _ in bands)), fn[keep][0]),
                max(min(eq.f_hi_hz, max(hi for _, hi in bands)), fn[keep][-1]))
        g, errors = None, {}
        for b in eq.b:
            res = core_eq.random_test_for_fds(fn[keep], life[b][keep], test_s, eq.q, b,
                                              rtol=r.FDS_RTOL, band_hz=band)
            err = np.abs(res.achieved_fds / res.target_fds - 1.0)
            if not np.all(err <= r.FDS_RTOL):
                i = int(np.argmax(np.where(np.isfinite(err), err, np.inf)))
                raise ValidationFailed(
                    "combination", "fds_equivalent",
                    f"the FDS inversion did not converge for b = {b:g}: worst FDS error "
                    f"{err[i]:.3g} at fn = {fn[keep][i]:.4g} Hz (tolerance {r.FDS_RTOL:g}); "
                    "the level is not stored. Narrow the policy's band or check the inputs")
            f, a = res.freq_hz, res.breakpoints_asd_g2_hz
            g = a if g is None else np.maximum(g, a)
            errors[f"{b:g}"] = res.max_error
    info = {"inputs": [i.label for i in inputs], "test_duration_s": test_s, "q": eq.q,
            "b": list(eq.b), "max_fds_error": errors,
            "band_hz": [float(f[0]), float(f[-1])],
            "exposures": {i.label: _exposure_words(i) for i in inputs},
            "method": "PSD whose exact FDS in the test duration equals the sum of the "
                      "inputs' FDS over their own exposures (narrow-band inversion "
                      "refined by Newton steps; flat to the band's edges; envelope over b)"}
    return f, g, info


def _exposure_words(item: Input) -> str:
    amount, unit = exposure(item.environment, item.revision)
    return f"{amount:.6g} {unit}"


def _random_duration(rule: s.RandomRule, life_s: float):
    """Test duration per axis and, under an inverse power law, the level increase."""
    if rule.compression_exponent and rule.duration_s:
        t = rule.duration_s
        if life_s > t:
            factor = (life_s / t) ** (2.0 / rule.compression_exponent)
            return t, {
                "db": float(10 * np.log10(factor)),
                "life_s": life_s,
                "test_s": t,
                "exponent": rule.compression_exponent,
                "method": "inverse power law, W2/W1 = (T1/T2)^(2/m) "
                "(MIL-STD-810H Method 514.8 Annex A)",
            }
        return life_s, None
    if rule.duration_factor:
        return rule.duration_factor * life_s, None
    if rule.duration_s:
        return rule.duration_s, None
    return life_s, None


def derive_shock(
    recipe: s.LevelRecipe, rules: s.PolicyRules, inputs: list[Input]
) -> r.ShockResult:
    rule = rules.shock[recipe.grade]
    steps: list[r.Step] = []
    curves = _shock_curves(inputs, rule.q, steps)
    if recipe.combination == "envelope":
        if len(curves) > 1:
            env = core_srs.srs_envelope([core_srs.SrsProfile(f, v) for f, v in curves])
            f, v = env.freq_hz, env.accel_g
        else:
            f, v = curves[0]
        steps.append(_step("maximum envelope", inputs=[i.label for i in inputs]))
    else:
        f, v, info = _statistical(curves, power=False)
        steps.append(_step("P95/50", **info))
    f_in, v_in = np.asarray(f, float), np.asarray(v, float)
    f, v, excess = _simplified(f, v, recipe.max_breakpoints, power=False)
    # the rms figure hides a local raise (an SRS's rms over frequency is dominated by its
    # top end): the worst raise at an input frequency and where it is, beside it
    local = 20 * np.log10(core_srs.SrsProfile(f, v).value_at(f_in) / v_in)
    worst = int(np.argmax(local))
    steps.append(_step("conservative simplification", max_breakpoints=recipe.max_breakpoints,
                       excess_db=excess, worst_local_excess_db=float(max(local[worst], 0.0)),
                       worst_local_excess_at_hz=float(f_in[worst])))
    limit = r.CurveLimit(freq_hz=list(map(float, f)), accel_g=list(map(float, v)))
    margin = (
        rules.analysis.margin_db if recipe.purpose is m.LevelPurpose.analysis else rule.margin_db
    )
    v = np.asarray(v) * from_db_amplitude(margin)
    steps.append(_step("margin", db=margin))
    directions = 2 if rule.directions == "both" else 1
    f = list(map(float, f))
    v = list(map(float, v))
    return r.ShockResult(
        freq_hz=f, accel_g=v, q=rule.q,
        slopes_db_per_oct=core_srs.SrsProfile(f, v).slopes_db_per_oct().tolist(),
        lower_db=rule.lower_db, upper_db=rule.upper_db,
        outer_lower_db=rule.outer_lower_db, outer_upper_db=rule.outer_upper_db,
        min_share_within_band=rule.min_share_within_band,
        min_fraction_above_nominal=rule.min_fraction_above_nominal,
        shocks_per_direction=rule.shocks_per_direction, directions=rule.directions,
        shocks_per_axis=rule.shocks_per_direction * directions, steps=steps, limit=limit,
        tolerance_band=r.shock_band(f, v, rule.lower_db, rule.upper_db),
        verdicts=r.Verdicts(converged=True, controllable=(
            None if recipe.purpose is m.LevelPurpose.analysis else True)),
    )


def derive_sine(recipe: s.LevelRecipe, rules: s.PolicyRules, inputs: list[Input]
                ) -> r.SineResult:
    rule = rules.sine[recipe.grade]
    if recipe.purpose is m.LevelPurpose.analysis:
        factor = from_db_amplitude(rules.analysis.margin_db)
    else:
        factor = rule.factor
    specs = [envdata.sine_spec_of(i.revision.spec) for i in inputs]
    steps = [_step("maximum envelope", inputs=[i.label for i in inputs])]
    bands = None
    if len(specs) == 1:
        bands = [
            dict(b, amplitude=b["amplitude"] * factor) for b in inputs[0].revision.spec["bands"]
        ]
        spec = envdata.sine_spec_of({"bands": bands})
        table_f = np.unique(
            np.concatenate([spec.breaks_hz, np.geomspace(spec.f_lo_hz, spec.f_hi_hz, 49)])
        )
        table_a = spec.accel_g(table_f)
    else:
        table = core_sine.envelope(specs)
        table_f, table_a = table.freq_hz, table.accel_g_points * factor
    steps.append(_step("factor", factor=factor, basis=rule.basis))
    sweep = core_sine.Sweep(
        core_sine.SineTable(table_f, table_a),
        rule.sweep_rate_oct_per_min,
        direction=rule.direction,
        n_sweeps=rule.sweeps,
    )
    f, a = list(map(float, table_f)), list(map(float, table_a))
    return r.SineResult(
        bands=bands, freq_hz=f, accel_g=a,
        sweep_rate_oct_per_min=rule.sweep_rate_oct_per_min, direction=rule.direction,
        sweeps=rule.sweeps, tolerance_pct=rule.tolerance_pct, steps=steps,
        limit=r.CurveLimit(freq_hz=f, accel_g=list(map(float, np.asarray(table_a) / factor))),
        sweep_time_s=sweep.duration_s, peak_accel_g=float(np.max(table_a)),
        tolerance_band=r.sine_band(f, a, rule.tolerance_pct),
        verdicts=r.Verdicts(converged=True, controllable=(
            None if recipe.purpose is m.LevelPurpose.analysis else True)),
    )


# --- the use case ---------------------------------------------------------------------


def _with_coverage(result, life: list[LifeItem], rules: s.PolicyRules,
                   cache: cov.SpectraCache | None = None):
    """The test level with its coverage of the life and the verdicts that follow."""
    coverage = cov.coverage_of_level(result, life, rules, cache)
    covers, reasons = r.covers_life(coverage)
    verdicts = result.verdicts.model_copy(update={
        "covers_life": covers, "reasons": [*result.verdicts.reasons, *reasons]})
    return result.model_copy(update={"coverage": coverage, "verdicts": verdicts})


def check_recipe(session: Session, actor: Actor, recipe: s.LevelRecipe) -> None:
    """What :func:`derive_level` checks before any computation (the product, the caller's
    role on it, the policy): a derivation queued as a job is refused at submission."""
    product = get(session, m.Product, recipe.product_id, "product")
    require_for(session, actor, product, m.Role.engineer, "deriving a level")
    get(session, m.MarginPolicy, recipe.policy_id, "policy")


def derive_level(session: Session, actor: Actor, recipe: s.LevelRecipe,
                 progress: Callable[[float, str], None] | None = None) -> m.Level:
    """Derive a level from a recipe; store it with its inputs' hashes and coverage.

    `progress(fraction, phrase)` is told each stage (a job's progress report; it may
    raise to stop the derivation, whose writes the caller then rolls back)."""
    say = progress or (lambda fraction, phrase: None)
    product = get(session, m.Product, recipe.product_id, "product")
    require_for(session, actor, product, m.Role.engineer, "deriving a level")
    policy = get(session, m.MarginPolicy, recipe.policy_id, "policy")
    rules = rules_of(policy)
    say(0.02, f"reading {len(recipe.revision_ids)} input revisions")
    inputs = _inputs(session, recipe, product)
    say(0.15, "reading the life cycle of the product and axis")
    life = life_cycle(session, product, recipe.axis)
    cache: cov.SpectraCache = {}  # FDS/ERS of each input, computed once per derivation
    say(0.25, f"combining {len(inputs)} inputs ({recipe.combination}, {recipe.kind})")
    with envdata.core_errors(""):
        if recipe.kind == "random":
            life_s = sum(exposure_s(i) for i in inputs if i.environment.kind is not K.shock)
            result = derive_random(recipe, rules, inputs, life_s, cache)
        elif recipe.kind == "shock":
            result = derive_shock(recipe, rules, inputs)
        else:
            result = derive_sine(recipe, rules, inputs)
        if recipe.purpose is m.LevelPurpose.test:
            say(0.6, f"FDS and ERS coverage of the life ({len(life)} environments)")
            result = _with_coverage(result, life, rules, cache)
    say(0.95, "storing the level")
    hashes = {
        "revisions": {str(i.revision.id): i.revision.content_hash for i in inputs},
        "life_cycle": {str(x.revision.id): x.revision.content_hash for x in life},
        "policy": {"id": policy.id, "rules_hash": json_hash(policy.rules)},
    }
    recipe_json = recipe.model_dump(mode="json")
    repo = LevelRepository(session)
    level = repo.add(
        m.Level(
            product_id=product.id,
            policy_id=policy.id,
            name=recipe.name,
            number=repo.next_number(product.id, recipe.name),
            purpose=recipe.purpose,
            grade=recipe.grade,
            kind=K(recipe.kind),
            axis=recipe.axis,
            recipe=recipe_json,
            result=r.dump(result),
            input_hashes=hashes,
            level_hash=json_hash({"recipe": recipe_json, "inputs": hashes}),
            author=actor.name,
        )
    )
    record(
        session,
        actor,
        "derive",
        "level",
        level.id,
        name=level.name,
        number=level.number,
        level_hash=level.level_hash,
    )
    return level


def result_of(level: m.Level) -> r.RandomResult | r.SineResult | r.ShockResult:
    """The typed result of a stored level (rows of every schema version load)."""
    return r.load(level.kind.value, level.result)


def staleness(session: Session, level: m.Level) -> list[str]:
    """Why a level no longer reflects its inputs (empty when it is current)."""
    reasons = []
    if (w := level_withdrawal(session, level.id)) is not None:
        reasons.append(f"the level was {describe(w)}")
    if (sup := superseded_by(session, level.id)) is not None:
        new = session.get(m.Level, sup.new_level_id)
        reasons.append(f"superseded by {new.name} #{new.number} (id {new.id}), re-derived "
                       f"on the latest revisions of its inputs on {sup.created_at:%Y-%m-%d}")
    revs = RevisionRepository(session)
    used = dict(level.input_hashes.get("revisions", {}))
    if level.purpose is m.LevelPurpose.test:  # an analysis level carries no coverage of the
        used.update(level.input_hashes.get("life_cycle", {}))  # life: it does not depend on it
    for rid in used:
        rev = revs.get(int(rid))
        latest = revs.latest(rev.environment_id)
        if (w := environment_withdrawal(session, rev.environment_id)) is not None:
            reasons.append(f"environment {rev.environment.name!r} was {describe(w)}")
        elif latest is not None and latest.number != rev.number:
            reasons.append(
                f"environment {rev.environment.name!r} has revision {latest.number}, "
                f"the level used revision {rev.number}"
            )
        else:  # a transferred environment is stale when its parent inputs or rules changed
            reasons += [f"environment {rev.environment.name!r}: {r}"
                        for r in derivation_staleness(session, rev)]
    policy = session.get(m.MarginPolicy, level.input_hashes["policy"]["id"])
    if policy is None or json_hash(policy.rules) != level.input_hashes["policy"]["rules_hash"]:
        reasons.append("the margin policy's rules changed since the level was derived")
    if level.purpose is m.LevelPurpose.test:
        product = session.get(m.Product, level.product_id)
        known = set(level.input_hashes.get("life_cycle", {}))
        for x in life_cycle(session, product, level.axis):
            if str(x.revision.id) not in known and str(x.revision.id) not in used:
                if x.revision.number == 1:
                    reasons.append(
                        f"environment {x.environment.name!r} joined the life cycle "
                        "after the level was derived"
                    )
    return reasons


#: Ids per IN list of the set-based staleness (SQLite's bound-parameter limit is 32,766
#: since 3.32, 999 before; PostgreSQL's 65,535).
_IN_CHUNK = 900


def _chunks(ids) -> list[list[int]]:
    ids = sorted(set(ids))
    return [ids[i:i + _IN_CHUNK] for i in range(0, len(ids), _IN_CHUNK)]


def staleness_of_levels(session: Session, levels: list[m.Level]) -> dict[int, list[str]]:
    """:func:`staleness` of many levels at once, by level id: the same reasons in the same
    order, read in a few set-based queries (withdrawals, supersessions, the products'
    tree, the used revisions, the environments and their latest revisions, the policies)
    instead of several queries per level and per input revision.

    Only a transferred input revision (one with an ``EnvironmentDerivation``) is still
    followed up the tree one by one (``transfers.derivation_staleness``), once per
    revision however many levels use it.
    """
    if not levels:
        return {}
    level_ids = [lv.id for lv in levels]
    withdrawn_env = withdrawn_environment_ids(session)
    withdrawn_lv: dict[int, m.Withdrawal] = {}
    sup: dict[int, tuple[m.LevelSupersession, str, int, int]] = {}
    for chunk in _chunks(level_ids):
        withdrawn_lv.update((w.level_id, w) for w in session.scalars(
            select(m.Withdrawal).where(m.Withdrawal.level_id.in_(chunk))))
        rows = session.scalars(select(m.LevelSupersession)
                               .where(m.LevelSupersession.old_level_id.in_(chunk))).all()
        news = {i: (name, number) for i, name, number in session.execute(
            select(m.Level.id, m.Level.name, m.Level.number)
            .where(m.Level.id.in_([x.new_level_id for x in rows])))}
        for row in rows:
            sup[row.old_level_id] = (row, *news[row.new_level_id], row.new_level_id)
    # the products' tree: each product's lineage (the product and its ancestors)
    parent: dict[int, int | None] = {}
    todo = {lv.product_id for lv in levels}
    while todo:
        for chunk in _chunks(todo):
            parent.update(session.execute(
                select(m.Product.id, m.Product.parent_id).where(m.Product.id.in_(chunk))).all())
        todo = {p for p in parent.values() if p is not None and p not in parent}

    def lineage_of(pid: int) -> list[int]:
        ids = []
        while pid is not None:
            ids.append(pid)
            pid = parent.get(pid)
        return ids

    test_products = {lv.product_id for lv in levels if lv.purpose is m.LevelPurpose.test}
    life_products = {x for pid in test_products for x in lineage_of(pid)}
    # environments a transfer replaced, by the product whose derivation says so
    replaced_by: dict[int, set[int]] = {}
    for chunk in _chunks(life_products):
        for pid, recipe in session.execute(
                select(m.EnvironmentDerivation.product_id, m.EnvironmentDerivation.recipe)
                .where(m.EnvironmentDerivation.product_id.in_(chunk))):
            replaced_by.setdefault(pid, set()).update(
                int(x) for x in recipe.get("parent_environment_ids", []))
    # the revisions each level used: environment and number
    used_of: dict[int, dict[str, str]] = {}
    for lv in levels:
        used = dict(lv.input_hashes.get("revisions", {}))
        if lv.purpose is m.LevelPurpose.test:
            used.update(lv.input_hashes.get("life_cycle", {}))
        used_of[lv.id] = used
    rev_env: dict[int, tuple[int, int]] = {}  # revision id: (environment id, number)
    for chunk in _chunks(int(rid) for used in used_of.values() for rid in used):
        rev_env.update((rid, (env_id, number)) for rid, env_id, number in session.execute(
            select(m.EnvironmentRevision.id, m.EnvironmentRevision.environment_id,
                   m.EnvironmentRevision.number).where(m.EnvironmentRevision.id.in_(chunk))))
    # environments: those of the used revisions, and every one of the life products
    envs: dict[int, tuple[int, m.Axis, str]] = {}  # id: (product id, axis, name)
    cols = (m.Environment.id, m.Environment.product_id, m.Environment.axis,
            m.Environment.name)
    for chunk in _chunks(life_products):
        envs.update((i, (p, a, n)) for i, p, a, n in session.execute(
            select(*cols).where(m.Environment.product_id.in_(chunk))))
    for chunk in _chunks({e for e, _ in rev_env.values()} - set(envs)):
        envs.update((i, (p, a, n)) for i, p, a, n in session.execute(
            select(*cols).where(m.Environment.id.in_(chunk))))
    latest: dict[int, tuple[int, int]] = {}  # environment id: (revision id, number)
    rv = m.EnvironmentRevision
    for chunk in _chunks(envs):
        top = (select(rv.environment_id, func.max(rv.number).label("number"))
               .where(rv.environment_id.in_(chunk)).group_by(rv.environment_id).subquery())
        latest.update((env_id, (rid, number)) for env_id, rid, number in session.execute(
            select(rv.environment_id, rv.id, rv.number).join(
                top, (top.c.environment_id == rv.environment_id)
                & (top.c.number == rv.number))))
    derived: set[int] = set()  # used revisions made by a transfer
    for chunk in _chunks(rev_env):
        derived.update(session.scalars(select(m.EnvironmentDerivation.revision_id)
                                       .where(m.EnvironmentDerivation.revision_id.in_(chunk))))
    policy_ids = {lv.input_hashes["policy"]["id"] for lv in levels}
    rules_hash: dict[int, str] = {}
    for chunk in _chunks(x for x in policy_ids if x is not None):
        rules_hash.update((pid, json_hash(rules)) for pid, rules in session.execute(
            select(m.MarginPolicy.id, m.MarginPolicy.rules).where(m.MarginPolicy.id.in_(chunk))))
    by_env_product: dict[int, list[int]] = {}
    for env_id in sorted(envs):
        by_env_product.setdefault(envs[env_id][0], []).append(env_id)
    transferred: dict[int, list[str]] = {}

    def life_of(product_id: int, axis: m.Axis) -> list[tuple[int, int, int]]:
        """``lifecycle.life_cycle`` as (environment id, revision id, number), by env id."""
        line = lineage_of(product_id)
        replaced = set().union(*(replaced_by.get(p, set()) for p in line))
        axes = None if axis is m.Axis.all else {axis, m.Axis.all}
        out = []
        for env_id in sorted(e for p in line for e in by_env_product.get(p, [])):
            if env_id in replaced or env_id in withdrawn_env:
                continue
            if axes is not None and envs[env_id][1] not in axes:
                continue
            if env_id in latest:
                out.append((env_id, *latest[env_id]))
        return out

    out: dict[int, list[str]] = {}
    for lv in levels:
        reasons = []
        if (w := withdrawn_lv.get(lv.id)) is not None:
            reasons.append(f"the level was {describe(w)}")
        if (found := sup.get(lv.id)) is not None:
            row, name, number, new_id = found
            reasons.append(f"superseded by {name} #{number} (id {new_id}), re-derived "
                           f"on the latest revisions of its inputs on {row.created_at:%Y-%m-%d}")
        used = used_of[lv.id]
        for rid in used:
            env_id, number = rev_env[int(rid)]
            env_name = envs[env_id][2]
            now = latest.get(env_id)
            if (w := withdrawn_env.get(env_id)) is not None:
                reasons.append(f"environment {env_name!r} was {describe(w)}")
            elif now is not None and now[1] != number:
                reasons.append(f"environment {env_name!r} has revision {now[1]}, "
                               f"the level used revision {number}")
            elif int(rid) in derived:
                if int(rid) not in transferred:
                    transferred[int(rid)] = derivation_staleness(
                        session, RevisionRepository(session).get(int(rid)))
                reasons += [f"environment {env_name!r}: {r}" for r in transferred[int(rid)]]
        pol = lv.input_hashes["policy"]
        if rules_hash.get(pol["id"]) != pol["rules_hash"]:
            reasons.append("the margin policy's rules changed since the level was derived")
        if lv.purpose is m.LevelPurpose.test:
            known = set(lv.input_hashes.get("life_cycle", {}))
            for env_id, rid, number in life_of(lv.product_id, lv.axis):
                if str(rid) not in known and str(rid) not in used and number == 1:
                    reasons.append(f"environment {envs[env_id][2]!r} joined the life cycle "
                                   "after the level was derived")
        out[lv.id] = reasons
    return out


def read_level(session: Session, level: m.Level) -> s.LevelRead:
    reasons = staleness(session, level)
    return s.LevelRead(
        id=level.id, product_id=level.product_id, policy_id=level.policy_id, name=level.name,
        number=level.number, purpose=level.purpose, grade=level.grade, kind=level.kind,
        axis=level.axis, recipe=level.recipe, result=result_of(level),
        input_hashes=level.input_hashes, level_hash=level.level_hash, author=level.author,
        created_at=level.created_at, policy_name=level.policy.name if level.policy else None,
        stale=bool(reasons), stale_reasons=reasons,
        withdrawn=describe(w) if (w := level_withdrawal(session, level.id)) else None,
        superseded_by_id=sup.new_level_id if (sup := superseded_by(session, level.id)) else None,
    )


def level_by_id(session: Session, level_id: int) -> m.Level:
    return get(session, m.Level, level_id, "level")


def list_levels(session: Session, product_id: int | None = None) -> list[m.Level]:
    return list(
        LevelRepository(session).list(
            **({"product_id": product_id} if product_id is not None else {})
        )
    )


# --- re-derivation: the same recipe on the latest revisions of its inputs ---------------


def _values(result) -> tuple[list[float], list[float], float, str, str, float, str]:
    """Breakpoints, their dB factor, the values' unit, and the overall measure."""
    if isinstance(result, r.RandomResult):
        return result.freq_hz, result.asd_g2_hz, 10.0, "g^2/Hz", "overall", result.grms, "g rms"
    if isinstance(result, r.SineResult):
        return (result.freq_hz, result.accel_g, 20.0, "g", "peak amplitude",
                result.peak_accel_g, "g peak")
    return result.freq_hz, result.accel_g, 20.0, "g", "peak SRS", max(result.accel_g), "g"


def difference(old_level: m.Level, new_level: m.Level, inputs: list[s.InputChange]
               ) -> s.LevelDifference:
    """New over old level in dB, at every breakpoint of either (log-log interpolation
    between breakpoints, as the profiles are defined; 10 log10 for a PSD, 20 log10 for
    an amplitude in g), and of the overall measure (g rms of a random level by its
    exact integral, the peak of a sine or shock level)."""
    old, new = result_of(old_level), result_of(new_level)
    fo, vo, k, unit, quantity, overall_old, overall_unit = _values(old)
    fn, vn, _, _, _, overall_new, _ = _values(new)
    grid = np.unique(np.concatenate([fo, fn]))
    at_old = core_psd.asd_at(fo, vo, grid)
    at_new = core_psd.asd_at(fn, vn, grid)
    rows = []
    for f, a, b in zip(grid, at_old, at_new, strict=True):
        a_, b_ = (float(a) if a > 0 else None), (float(b) if b > 0 else None)
        db = k * float(np.log10(b_ / a_)) if a_ and b_ else None
        rows.append(s.DifferenceRow(freq_hz=float(f), old=a_, new=b_, db=db))
    known = [abs(x.db) for x in rows if x.db is not None]
    return s.LevelDifference(
        level_id=old_level.id, name=old_level.name, old_number=old_level.number,
        new_number=new_level.number, kind=old_level.kind.value, unit=unit, rows=rows,
        overall_quantity=quantity, overall_unit=overall_unit, overall_old=float(overall_old),
        overall_new=float(overall_new),
        overall_db=20.0 * float(np.log10(overall_new / overall_old)),
        max_abs_db=max(known) if known else None, inputs=inputs)


def rederive_level(session: Session, actor: Actor, level_id: int, *, store: bool = True
                   ) -> s.LevelDifference:
    """Re-run a level's recipe on the latest revisions of its inputs.

    Returns the difference (per breakpoint and overall, in dB) from the old level.
    With ``store`` the new level is kept (the next number of its name) and supersedes
    the old one, which becomes stale; without it nothing is written.
    """
    old = level_by_id(session, level_id)
    require_for(session, actor, old, m.Role.engineer, "re-deriving a level")
    if (sup := superseded_by(session, old.id)) is not None:
        newer = session.get(m.Level, sup.new_level_id)
        raise Conflict(f"level {old.name} #{old.number} is superseded already by "
                       f"#{newer.number} (id {newer.id}): re-derive that one")
    if (w := level_withdrawal(session, old.id)) is not None:
        raise Conflict(f"level {old.name} #{old.number} was {describe(w)}")
    revs = RevisionRepository(session)
    new_ids, changes = [], []
    for rid in old.recipe["revision_ids"]:
        rev = revs.get(int(rid))
        latest = revs.latest(rev.environment_id)
        new_ids.append(latest.id)
        if latest.number != rev.number:
            changes.append(s.InputChange(environment=rev.environment.name,
                                         old_revision=rev.number, new_revision=latest.number))
    recipe = s.LevelRecipe.model_validate({**old.recipe, "revision_ids": new_ids})
    savepoint = session.begin_nested()
    try:
        new = derive_level(session, actor, recipe)
        if new.level_hash == old.level_hash:
            raise Conflict(f"level {old.name} #{old.number} is current: re-deriving it "
                           "changes nothing")
        diff = difference(old, new, changes)
    except BaseException:
        savepoint.rollback()
        raise
    if not store:
        savepoint.rollback()
        return diff
    savepoint.commit()
    session.add(m.LevelSupersession(old_level_id=old.id, new_level_id=new.id,
                                    difference=diff.model_dump(mode="json"), actor=actor.name))
    session.flush()
    record(session, actor, "supersede", "level", old.id, name=old.name, number=old.number,
           new_level=new.id, new_number=new.number, overall_db=diff.overall_db)
    return diff.model_copy(update={"stored": True, "new_level_id": new.id})
def compressed_inputs(session: Session, level: m.Level) -> list[dict[str, Any]]:
    """The level's inputs, each raised by its own time-compression step (the step naming
    that input; a first-release level's single step applies to all: x 10^(dB/10) on an
    ASD, x 10^(dB/20) on an amplitude), so that their envelope shows beside the level:
    [{"name", "freq_hz", "values"}], values in the level's unit. Time histories and
    inputs of another kind are left out."""
    steps = [st for st in result_of(level).steps
             if st.step == "time compression" and st.db is not None]
    per_input = {st.inputs[0]: float(st.db) for st in steps if len(st.inputs) == 1}
    common_db = sum(float(st.db) for st in steps if len(st.inputs) != 1)
    power = level.kind is m.EnvironmentKind.random
    revs = RevisionRepository(session)
    out = []
    for rid in level.recipe.get("revision_ids", []):
        rev = revs.get(int(rid))
        if rev is None or rev.environment.kind is not level.kind:
            continue
        env = rev.environment
        if env.kind is m.EnvironmentKind.sine:
            lo, hi = rev.spec["bands"][0]["f_lo_hz"], rev.spec["bands"][-1]["f_hi_hz"]
            f = np.unique(np.concatenate([np.geomspace(lo, hi, 160),
                                          [b["f_lo_hz"] for b in rev.spec["bands"]], [hi]]))
            v = np.asarray(envdata.curve(env.kind, rev.spec, rev.data, f), float)
        elif env.kind is m.EnvironmentKind.random:
            f, v = np.asarray(rev.spec["freq_hz"]), np.asarray(rev.spec["asd_g2_hz"], float)
        elif env.kind is m.EnvironmentKind.shock:
            f, v = np.asarray(rev.spec["freq_hz"]), np.asarray(rev.spec["accel_g"], float)
        else:
            continue
        name = f"{env.name} r{rev.number}"
        gain_db = per_input.get(name, 0.0) + common_db
        factor = 10 ** (gain_db / (10.0 if power else 20.0))
        label = name + (f", compressed {gain_db:+.2f} dB" if gain_db else "")
        out.append({"name": label, "freq_hz": [float(x) for x in f],
                    "values": [float(x) for x in v * factor]})
    return out
