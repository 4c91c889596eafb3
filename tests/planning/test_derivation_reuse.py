"""Work done once per derivation (issue 12, derivation speed): an FDS-equivalent level
inverts the FDS of its inputs, then its coverage needs the FDS and ERS of the same
environments; each environment's spectra are computed once and serve both, and the
stored level is the one computed without reuse (same numbers, same notes, same hash)."""

from __future__ import annotations

import numpy as np
import pytest

from qualplan.planning import catalog, environments, levels, policies
from qualplan.planning import coverage as cov
from qualplan.planning import schemas as s
from qualplan.store import models as m

K = m.EnvironmentKind


def _scenario(session, actor, program, unit):
    src = policies.policy_ref(session, "spaceflight-gevs")
    row = policies.copy_policy(session, actor, src.id, s.PolicyCopy(name="two b"))
    rules = policies.rules_of(row).model_copy(update={"equivalence": s.EquivalenceRule(
        b=[4.0, 8.0], f_lo_hz=20.0, f_hi_hz=1000.0)})
    pol = policies.update_policy(session, actor, row.id, s.PolicyUpdate(rules=rules), None)
    hour = catalog.create_phase(session, actor, s.PhaseCreate(
        program_id=program.id, name="hour", duration_s=3600.0))
    drop = catalog.create_phase(session, actor, s.PhaseCreate(
        program_id=program.id, name="drop", duration_s=10.0, occurrences=3))
    dt = 1 / 10_000  # a half-sine from zeros: the band-limited model's kink warning
    t = np.arange(int(0.05 / dt)) * dt
    pulse = np.where(t < 0.004, 30.0 * np.sin(np.pi * t / 0.004), 0.0)
    envs = [
        environments.create_environment(session, actor, s.EnvironmentCreate(
            product_id=unit.id, phase_id=drop.id, name="drop pulse",
            kind=K.time_history, axis=m.Axis.Z,
            data={"dt_s": dt, "accel_g": pulse.tolist(), "duration_s": 0.05})),
        environments.create_environment(session, actor, s.EnvironmentCreate(
            product_id=unit.id, phase_id=hour.id, name="wide", kind=K.random,
            axis=m.Axis.Z, data={"freq_hz": [20.0, 1000.0], "asd_g2_hz": [0.002, 0.002]})),
    ]
    return pol, [e.revisions[-1].id for e in envs]


def _derive(session, actor, unit, pol, revs, name):
    return levels.derive_level(session, actor, s.LevelRecipe(
        product_id=unit.id, name=name, kind="random", axis=m.Axis.Z,
        combination="fds_equivalent", revision_ids=revs, policy_id=pol.id,
        max_breakpoints=200))


def test_fds_equivalent_computes_each_input_once_and_stores_the_same_level(
        session, engineer, program, unit, monkeypatch):
    pol, revs = _scenario(session, engineer, program, unit)
    computed = []
    inner = cov._spectra_of_environment

    def counted(item, fn, q, bs):
        computed.append(item.revision.id)
        return inner(item, fn, q, bs)

    monkeypatch.setattr(cov, "_spectra_of_environment", counted)
    reused = _derive(session, engineer, unit, pol, revs, "reused")
    # each input once: the inversion and the coverage (same grid, Q, b, exposure) share it
    assert sorted(computed) == sorted(revs)

    computed.clear()
    outer = cov.spectra_of_environment
    monkeypatch.setattr(cov, "spectra_of_environment",
                        lambda item, fn, q, bs, cache=None: outer(item, fn, q, bs))
    fresh = _derive(session, engineer, unit, pol, revs, "fresh")
    assert sorted(computed) == sorted(revs + revs)  # without reuse: twice each

    a, b = reused.result, fresh.result
    assert a == b  # every number and note of the stored result
    assert a["coverage"]["notes"], "the kink warning of the record must reach the notes"
    assert any("the record has a kink" in n for n in a["coverage"]["notes"])
    assert reused.input_hashes == fresh.input_hashes


def test_cache_keeps_apart_what_differs(session, engineer, program, unit):
    # a different grid or b list is computed afresh, never taken from the cache
    pol, revs = _scenario(session, engineer, program, unit)
    from qualplan.planning.lifecycle import life_cycle

    item = next(x for x in life_cycle(session, unit, m.Axis.Z) if x.revision.id == revs[1])
    cache: cov.SpectraCache = {}
    fn = np.geomspace(20.0, 1000.0, 12)
    one = cov.spectra_of_environment(item, fn, 10.0, [4.0], cache)
    other = cov.spectra_of_environment(item, fn[:6], 10.0, [4.0, 8.0], cache)
    assert len(cache) == 2
    assert other.fds[4.0] == pytest.approx(one.fds[4.0][:6], rel=1e-12)
    assert cov.spectra_of_environment(item, fn, 10.0, [4.0], cache) is one


def test_a_record_is_unpacked_once_per_derivation(session, engineer, program, unit,
                                                   monkeypatch):
    # the level's inputs and its life cycle hold the same revision rows: the record's
    # samples are read from the database and unpacked once, not once for each use
    from qualplan.store import types

    pol, revs = _scenario(session, engineer, program, unit)
    session.flush()
    session.expire_all()  # as in a new request: nothing loaded yet
    unpacked = []
    inner = types.unpack_array

    def counted(blob):
        unpacked.append(len(blob))
        return inner(blob)

    monkeypatch.setattr(types, "unpack_array", counted)
    _derive(session, engineer, unit, pol, revs, "once")
    assert len(unpacked) == 1  # one record among the inputs and in the life
