"""The coverage of a level (or a test sequence) against the life cycle of its axis.

The life cycle itself (its environments and their exposures) is ``planning.lifecycle``.

Each environment of the life is turned into FDS and ERS on the policy's
natural-frequency grid by the numeric core (``fatigue``, ``extreme``): a PSD over
its exposure time, a sweep times its occurrences, a record times its passes. A
shock given only as an SRS is represented by a wavelet synthesis that matches the
SRS within +/-1.5 dB (``shock_synthesis``; compensated damped sines where the wavelets
do not converge, and a coverage note with the miss where neither does), whose FDS and
ERS are computed in the time domain. The life's FDS is the Miner sum over environments, its ERS the
maximum; ``equivalence.coverage`` forms the ratios test/life and their verdicts.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from sqlalchemy.orm import Session

from qualplan.dynamics import equivalence as core_eq
from qualplan.dynamics import extreme as core_ers
from qualplan.dynamics import fatigue as core_fds
from qualplan.dynamics import shock_synthesis as core_synth
from qualplan.dynamics import sine as core_sine
from qualplan.dynamics import srs as core_srs
from qualplan.dynamics.errors import AccuracyWarning
from qualplan.planning import envdata
from qualplan.planning import results as r
from qualplan.planning import schemas as s
from qualplan.planning.lifecycle import (
    LifeItem,
    current_test_levels,
    exposure,
    life_cycle,
    time_counted_twice,
)
from qualplan.planning.policies import rules_of
from qualplan.store import models as m

K = m.EnvironmentKind
#: Natural frequencies of a sampled record: up to RECORD_FN_MAX of its sample rate (the
#: band-limited input model's verified range); above, none.
RECORD_FN_MAX = 0.2


@dataclass(frozen=True)
class Spectra:
    """FDS per b (for one unit of exposure times its amount) and ERS, on one fn grid."""

    label: str
    fds: dict[float, np.ndarray]
    ers: np.ndarray


def _random(label, f, a, seconds, fn, q, bs) -> Spectra:
    return Spectra(
        label,
        {b: core_fds.fds_random(f, a, seconds, fn, q, b) for b in bs},
        core_ers.ers_random(f, a, seconds, fn, q),
    )


def _sweep(label, sweep: core_sine.Sweep, times: float, fn, q, bs) -> Spectra:
    return Spectra(
        label,
        {b: times * core_fds.fds_sweep(sweep, fn, q, b) for b in bs},
        core_ers.ers_sweep(sweep, fn, q),
    )


def _record(label, x, dt, times, fn, q, bs) -> Spectra:
    """FDS and ERS of a sampled record (the samples of a band-limited signal) for fn up
    to RECORD_FN_MAX of its sample rate, none above, in one pass of
    ``fatigue.fds_time(method="bandlimited", return_peak=True)``: FFT reconstruction where
    fs < 20 fn; the FDS within 3 % of that of the record upsampled 8x for b = 4 to 12 and
    fs >= 5 fn, the ERS (peaks of the same response) within 1.2 %
    (docs/methods/between-samples.md, fatigue.md). The piecewise-linear input model read a
    band-limited random record's FDS 20 % low at fs = 13.6 fn (b = 12)."""
    fn = np.asarray(fn, float)
    sel = fn <= RECORD_FN_MAX / dt * (1 + 1e-9)
    fds = {b: np.zeros_like(fn) for b in bs}
    ers = np.zeros_like(fn)
    if sel.any():
        # free decay after the record: a shock's residual response does damage too;
        # one pass per fn serves every b (the rainflow cycles do not depend on b)
        # and gives the ERS (the maximax pseudo-acceleration of the same response)
        d, peak = core_fds.fds_time(x, dt, fn[sel], q, [float(b) for b in bs],
                                    free_decay=True, method="bandlimited", return_peak=True)
        for j, b in enumerate(bs):
            fds[b][sel] = times * d[j]
        ers[sel] = peak
        for text in core_ers.ers_shock_warnings(x, dt, fn[sel], method="bandlimited"):
            warnings.warn(text, AccuracyWarning, stacklevel=2)
    return Spectra(label, fds, ers)


def _shock(label, freq_hz, accel_g, q_spec, count, fn, q, bs) -> Spectra:
    """A shock given as an SRS, represented by a time history that matches it within
    +/-1.5 dB: a wavelet synthesis, or where that does not converge (targets that fall
    steeply) a synthesis of compensated damped sines (shock_synthesis, Smallwood & Nord
    1974, from memory); if neither converges, the better one is used and the coverage
    notes say by how much its SRS misses the shock's (its FDS and ERS are off with it)."""
    profile = core_srs.SrsProfile(freq_hz, accel_g)
    synth = core_synth.synthesize_shock(profile, q=q_spec, seed=0)
    how = "wavelet synthesis"
    if not synth.converged:
        other = core_synth.synthesize_shock(profile, q=q_spec, seed=0, method="damped_sines")
        if other.max_error_db < synth.max_error_db:
            synth, how = other, "damped-sine synthesis"
    if not synth.converged:
        warnings.warn(
            f"{label}: the {how} that stands for this shock misses its SRS by up to "
            f"{synth.max_error_db:.2f} dB (asked: +/-{synth.tolerance_db:g} dB); its FDS and "
            f"ERS in the coverage are off by as much (a synthesis from free samples reaches "
            f"such targets, at a cost too high to run inside a derivation)",
            AccuracyWarning, stacklevel=2)
    return _record(f"{label} ({how})", synth.accel_g, synth.dt_s, count, fn, q, bs)


#: Spectra of environments already computed in one derivation, with the warnings their
#: computation gave: {key: (Spectra, [(category, message)])} (see spectra_of_environment).
SpectraCache = dict[tuple, tuple[Spectra, list[tuple[type[Warning], str]]]]


def spectra_of_environment(item: LifeItem, fn, q: float, bs,
                           cache: SpectraCache | None = None) -> Spectra:
    """FDS per b and ERS of one environment of the life over its exposure, on `fn`.

    With `cache` (one dict per derivation), an environment revision already computed on
    the same grid, Q, b values and exposure is not computed again (an FDS-equivalent
    level inverts the inputs' FDS, then its coverage needs the same spectra); the
    warnings of the first computation are given again, so both uses see them."""
    if cache is None:
        return _spectra_of_environment(item, fn, q, bs)
    rev = item.revision
    key = (rev.id, rev.content_hash, item.life_label, exposure(item.environment, rev),
           np.asarray(fn, float).tobytes(), float(q), tuple(float(b) for b in bs))
    if key not in cache:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            spectra = _spectra_of_environment(item, fn, q, bs)
        cache[key] = (spectra, [(w.category, str(w.message)) for w in caught])
    spectra, given = cache[key]
    for category, message in given:
        warnings.warn(message, category, stacklevel=2)
    return spectra


def _spectra_of_environment(item: LifeItem, fn, q: float, bs) -> Spectra:
    env, rev = item.environment, item.revision
    amount, _ = exposure(env, rev)
    spec = rev.spec
    label = item.life_label
    if env.kind is K.random:
        return _random(label, spec["freq_hz"], spec["asd_g2_hz"], amount, fn, q, bs)
    if env.kind is K.sine:
        return _sweep(label, envdata.sweep_of(spec), amount, fn, q, bs)
    if env.kind is K.shock:
        return _shock(label, spec["freq_hz"], spec["accel_g"], spec["q"], amount, fn, q, bs)
    if "run_samples" in spec:
        # runs of one condition: the worst run's damage per second x the exposure, once
        seconds = amount * np.asarray(rev.data).size * spec["dt_s"]
        parts = [_record(label, x, spec["dt_s"], seconds / (x.size * spec["dt_s"]), fn, q, bs)
                 for x in envdata.runs_of(spec, rev.data)]
        return Spectra(label, {b: np.max([p.fds[b] for p in parts], axis=0) for b in bs},
                       np.max([p.ers for p in parts], axis=0))
    return _record(label, np.asarray(rev.data), spec["dt_s"], amount, fn, q, bs)


def spectra_of_level(result: r.RandomResult | r.SineResult | r.ShockResult, fn, q: float,
                     bs) -> Spectra:
    if isinstance(result, r.RandomResult):
        return _random("test level", result.freq_hz, result.asd_g2_hz, result.duration_s,
                       fn, q, bs)
    if isinstance(result, r.SineResult):
        sweep = core_sine.Sweep(
            core_sine.SineTable(result.freq_hz, result.accel_g),
            result.sweep_rate_oct_per_min,
            direction=result.direction,
            n_sweeps=result.sweeps,
        )
        return _sweep("test level", sweep, 1.0, fn, q, bs)
    return _shock("test level", result.freq_hz, result.accel_g, result.q,
                  float(result.shocks_per_axis), fn, q, bs)


Tested = tuple[str, "r.RandomResult | r.SineResult | r.ShockResult"]


def coverage_of_level(result: r.RandomResult | r.SineResult | r.ShockResult,
                      life: list[LifeItem], rules: s.PolicyRules,
                      cache: SpectraCache | None = None) -> r.Coverage:
    """FDS and ERS coverage of one test level against the life cycle (`cache`: the
    derivation's spectra already computed, spectra_of_environment)."""
    return _coverage([("test level", result)], life, rules, cache)


def program_coverage(session: Session, product: m.Product, axis: m.Axis, grade: m.Grade,
                     rules: s.PolicyRules) -> r.Coverage:
    """Coverage of the life of one axis by the whole test sequence of that axis and grade.

    The sequence is the newest number of every test level of the product on `axis`
    (random, sine and shock together): their FDS add (Miner), their ERS envelope. When
    every level was checked against the same life on the same grid, their stored
    spectra are combined; otherwise the spectra are computed afresh.
    """
    chosen = [lv for lv in current_test_levels(session, product.id, grade) if lv.axis is axis]
    tests = [(f"{lv.name} #{lv.number}", r.load(lv.kind.value, lv.result))
             for lv in sorted(chosen, key=lambda x: x.name)]
    if not tests:
        return r.Coverage(notes=[f"no {grade.value} test level on axis {axis.value}"])
    stored = combine_stored(tests, rules)
    if stored is not None:
        return stored
    return _coverage(tests, life_cycle(session, product, axis), rules)


AXIS_ORDER = {"X": 0, "Y": 1, "Z": 2, "all": 3}
KIND_ORDER = {"random": 0, "sine": 1, "shock": 2}


def specification_order(level: m.Level) -> tuple[int, int, str]:
    """Sort key of levels as a specification lists them: axis, then kind, then name."""
    return AXIS_ORDER[level.axis.value], KIND_ORDER[level.kind.value], level.name


@dataclass(frozen=True)
class AxisSequence:
    """The test sequence of one axis (its levels' names) and its coverage of that axis's
    life: FDS summed (Miner), ERS enveloped; None when the levels were checked against
    different life cycles or grids (derive them again to combine them)."""

    axis: str
    tests: list[str]
    coverage: r.Coverage | None


def sequence_by_axis(levels: list[m.Level]) -> list[AxisSequence]:
    """The test sequences of `levels`, one per axis (X, Y, Z, all), each the combination
    of the coverage stored with its levels (:func:`combine_stored`) under the policy of
    the axis's first level. The issued specification and the product page both use it."""
    out = []
    for axis in sorted({lv.axis for lv in levels}, key=lambda a: AXIS_ORDER[a.value]):
        on_axis = [lv for lv in levels if lv.axis is axis]
        tests = [(f"{lv.name} #{lv.number}", r.load(lv.kind.value, lv.result))
                 for lv in on_axis]
        policy = on_axis[0].policy
        combined = combine_stored(tests, rules_of(policy)) if policy is not None else None
        out.append(AxisSequence(axis=axis.value, tests=[t[0] for t in tests],
                                coverage=combined))
    return out


def product_sequence(session: Session, product_id: int, grade: m.Grade | str
                  ) -> list[AxisSequence]:
    """The current test levels of a product for a grade, per axis, with their coverage
    of the life (:func:`sequence_by_axis`), in the order of the specification."""
    chosen = current_test_levels(session, product_id, m.Grade(grade))
    chosen.sort(key=specification_order)
    return sequence_by_axis(chosen)


def combine_stored(tests: list[Tested], rules: s.PolicyRules) -> r.Coverage | None:
    """Combine the coverage stored with each level (FDS summed, ERS enveloped), or None
    when the levels were not checked on the same grid, b values and life cycle."""
    covs = [t[1].coverage or r.Coverage() for t in tests]
    first = covs[0]
    if not first.fn_hz or first.ers is None:
        return None
    same = all(c.fn_hz == first.fn_hz and c.life == first.life
               and set(c.by_b) == set(first.by_b) and c.ers is not None for c in covs)
    if not same:
        return None
    eq = rules.equivalence
    fn = np.asarray(first.fn_hz)
    by_b = {}
    passed = True
    for b in first.by_b:
        test_fds = np.sum([c.by_b[b].test_fds for c in covs], axis=0)
        block = _fds_block(fn, test_fds, np.asarray(first.by_b[b].life_fds), float(b), eq)
        by_b[b] = block
        passed &= block.passed
    test_ers = np.max([c.ers.test_ers for c in covs], axis=0)
    ers = _ers_block(fn, test_ers, np.asarray(first.ers.life_ers), eq)
    return r.Coverage(fn_hz=first.fn_hz, q=first.q, b=first.b, tests=[t[0] for t in tests],
                      life=first.life, by_b=by_b, ers=ers,
                      passed=bool(passed and ers.passed),
                      notes=sorted({n for c in covs for n in c.notes}))


def _fds_block(fn: np.ndarray, test_fds: np.ndarray, life_fds: np.ndarray, b: float,
               eq: s.EquivalenceRule) -> r.FdsCoverage:
    c = core_eq.coverage(fn, test_fds=test_fds, life_fds=life_fds, b=b,
                         fds_margin_db=eq.fds_margin_db)
    return r.FdsCoverage(
        test_fds=test_fds.tolist(), life_fds=life_fds.tolist(),
        fds_ratio_db=c.fds_ratio_db.tolist(), fds_level_db=c.fds_level_db.tolist(),
        required_db=eq.fds_margin_db, worst_fn_hz=c.worst_fds_fn_hz,
        worst_db=c.worst_fds_margin_db, passed=c.passed)


def _ers_block(fn: np.ndarray, test_ers: np.ndarray, life_ers: np.ndarray,
               eq: s.EquivalenceRule) -> r.ErsCoverage:
    e = core_eq.coverage(fn, test_ers=test_ers, life_ers=life_ers,
                         ers_margin_db=eq.ers_margin_db, overtest_db=eq.overtest_limit_db)
    return r.ErsCoverage(
        test_ers=test_ers.tolist(), life_ers=life_ers.tolist(),
        ers_ratio_db=e.ers_ratio_db.tolist(), required_db=eq.ers_margin_db,
        worst_fn_hz=e.worst_ers_fn_hz, worst_db=e.worst_ers_margin_db,
        passed=e.passed, overtest_limit_db=eq.overtest_limit_db,
        overtest_fn_hz=fn[e.overtest].tolist(), max_overtest_db=e.max_overtest_db,
        max_overtest_fn_hz=e.max_overtest_fn_hz)


def _coverage(tests: list[Tested], life: list[LifeItem], rules: s.PolicyRules,
              cache: SpectraCache | None = None) -> r.Coverage:
    eq = rules.equivalence
    notes: list[str] = []
    # a multi-channel record stored in chunks (planning.records) has no samples on its
    # revision row; it is not counted here, and the coverage says so
    chunked = [x for x in life if x.revision.data is None and "record" in x.revision.spec]
    notes.extend(f"{x.life_label}: multi-channel record stored in chunks, not counted in "
                 "this coverage (analyse it with a record analysis job)" for x in chunked)
    life = [x for x in life if x not in chunked]
    notes.extend(time_counted_twice(life))
    if not life:
        return r.Coverage(tests=[t[0] for t in tests],
                          notes=[*notes, "no environment in the life cycle of this axis"])
    fn = core_srs.octave_grid(eq.f_lo_hz, eq.f_hi_hz, eq.points_per_octave)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", AccuracyWarning)
        test_parts = [spectra_of_level(result, fn, eq.q, eq.b) for _, result in tests]
        parts = [spectra_of_environment(x, fn, eq.q, eq.b, cache) for x in life]
    notes.extend(sorted({str(w.message) for w in caught}))
    test_ers = np.max([p.ers for p in test_parts], axis=0)
    test_fds = {b: np.sum([p.fds[b] for p in test_parts], axis=0) for b in eq.b}
    life_ers = np.max([p.ers for p in parts], axis=0)
    life_fds = {b: np.sum([p.fds[b] for p in parts], axis=0) for b in eq.b}
    keep = (life_ers > 0) & np.all([life_fds[b] > 0 for b in eq.b], axis=0)
    keep &= (test_ers > 0) & np.all([test_fds[b] > 0 for b in eq.b], axis=0)
    if not keep.all():
        notes.append(f"{int((~keep).sum())} natural frequencies have no response of the test "
                     "or of the life (outside every spectrum's reach) and are left out")
    fk = fn[keep]
    by_b = {f"{b:g}": _fds_block(fk, test_fds[b][keep], life_fds[b][keep], b, eq)
            for b in eq.b}
    ers = _ers_block(fk, test_ers[keep], life_ers[keep], eq)
    return r.Coverage(fn_hz=fk.tolist(), q=eq.q, b=list(eq.b), tests=[t[0] for t in tests],
                      life=[x.life_label for x in life], by_b=by_b, ers=ers,
                      passed=bool(all(x.passed for x in by_b.values()) and ers.passed),
                      notes=notes)
