"""A phase's time counted once: a spectrum and the measured runs of one condition, each
stored with the whole phase as its share, make the life count that condition twice. The
life cycle says so where the environment is read and in the coverage of every level
(rule of docs/methods/exposure.md; common practice: a condition's exposure is counted
once, MIL-STD-810H Method 514.8 Annex A builds the life from phase durations)."""

from __future__ import annotations

import numpy as np

from qualplan.planning import catalog, environments, levels, policies
from qualplan.planning import schemas as s
from qualplan.store import models as m

K = m.EnvironmentKind
FLAT = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01]}


def _phase(session, actor, program, name, duration_s):
    return catalog.create_phase(session, actor, s.PhaseCreate(
        program_id=program.id, name=name, duration_s=duration_s, occurrences=1))


def _env(session, actor, unit, phase, name, kind, data, axis=m.Axis.Z):
    return environments.create_environment(session, actor, s.EnvironmentCreate(
        product_id=unit.id, phase_id=phase.id, name=name, kind=kind, axis=axis, data=data))


def _record(seconds=4.0, rate=2048.0, share=None):
    rng = np.random.default_rng(7)
    data = {"dt_s": 1.0 / rate, "accel_g": rng.normal(0.0, 1.0, int(seconds * rate)).tolist()}
    return data if share is None else {**data, "share": share}


def test_a_spectrum_and_runs_of_one_phase_each_filling_it_are_flagged(session, engineer,
                                                                      program, unit):
    road = _phase(session, engineer, program, "road", 3600.0)
    spec = _env(session, engineer, unit, road, "road spec", K.random, FLAT)
    runs = _env(session, engineer, unit, road, "road runs", K.time_history, _record())
    for env in (spec, runs):
        out = environments.read_environment(session, env, with_warnings=True)
        assert len(out.warnings) == 1
        text = out.warnings[0]
        # shares 1 + 1 = 2 times the phase's time (hand sum)
        assert "phase 'road'" in text and "together fill 2 times the phase's time" in text
        assert "road spec r1 (random, axis Z, share 1)" in text
        assert "road runs r1 (time history, axis Z, share 1)" in text
    # a list leaves the life-cycle reads out
    assert environments.read_environment(session, spec).warnings == []

    pol = policies.policy_ref(session, "military-810h")
    level = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="road Z", kind="random", axis=m.Axis.Z,
        revision_ids=[spec.revisions[-1].id], policy_id=pol.id))
    notes = levels.read_level(session, level).result.coverage.notes
    assert any("together fill 2 times the phase's time" in n for n in notes)


def test_shares_that_split_a_phase_and_other_phases_are_not_flagged(session, engineer,
                                                                   program, unit):
    road = _phase(session, engineer, program, "road", 3600.0)
    rail = _phase(session, engineer, program, "rail", 7200.0)
    a = _env(session, engineer, unit, road, "road paved", K.random, {**FLAT, "share": 0.6})
    # 1440 s of 3600 s: share 0.4, so 0.6 + 0.4 fills the phase once (hand sum)
    _env(session, engineer, unit, road, "road gravel", K.random, {**FLAT, "duration_s": 1440.0})
    _env(session, engineer, unit, rail, "rail", K.time_history, _record())
    # another axis and a sine sweep of the same phase do not add to the Z broadband time
    _env(session, engineer, unit, road, "road X", K.random, FLAT, axis=m.Axis.X)
    _env(session, engineer, unit, road, "road tones", K.sine, {
        "bands": [{"f_lo_hz": 20.0, "f_hi_hz": 200.0, "quantity": "acceleration",
                   "amplitude": 0.5, "unit": "g"}],
        "sweep": {"rate_oct_per_min": 2.0, "direction": "up", "sweeps": 1}})
    assert environments.read_environment(session, a, with_warnings=True).warnings == []
    # a third Z spectrum in the phase tips it over: 0.6 + 0.4 + 0.25 = 1.25
    c = _env(session, engineer, unit, road, "road idle", K.random, {**FLAT, "share": 0.25})
    [text] = environments.read_environment(session, c, with_warnings=True).warnings
    assert "together fill 1.25 times the phase's time" in text
    assert "road gravel r1 (random, axis Z, share 0.4)" in text


def test_an_all_axes_environment_counts_on_each_axis_once(session, engineer, program, unit):
    road = _phase(session, engineer, program, "road", 3600.0)
    every = _env(session, engineer, unit, road, "road all", K.random, FLAT, axis=m.Axis.all)
    _env(session, engineer, unit, road, "road Y runs", K.time_history, _record(),
         axis=m.Axis.Y)
    [text] = environments.read_environment(session, every, with_warnings=True).warnings
    assert "road all r1 (random, axis all, share 1)" in text
    assert "road Y runs r1 (time history, axis Y, share 1)" in text


def test_the_one_query_of_a_phase_equals_the_life_cycle_read_per_axis(session, engineer,
                                                                      program, unit):
    """lifecycle.timed_of_phase (what an environment read asks) holds the items of
    life_cycle of each axis of that phase and of a timed kind: latest revisions only,
    withdrawn environments left out; environment_read equals read_environment."""
    from qualplan.planning import approvals, lifecycle

    road = _phase(session, engineer, program, "road", 3600.0)
    rail = _phase(session, engineer, program, "rail", 600.0)
    spec = _env(session, engineer, unit, road, "road spec", K.random, FLAT)
    environments.revise_environment(session, engineer, spec.id, s.RevisionIn(
        data={**FLAT, "share": 0.5}, note="half the phase"))
    _env(session, engineer, unit, road, "road runs", K.time_history, _record(), axis=m.Axis.X)
    _env(session, engineer, unit, road, "road all", K.random, {**FLAT, "share": 0.7},
         axis=m.Axis.all)
    gone = _env(session, engineer, unit, road, "road old", K.random, FLAT)
    approvals.withdraw_environment(session, engineer, gone.id, "superseded by road spec")
    _env(session, engineer, unit, rail, "rail", K.random, FLAT)
    axes = [m.Axis.X, m.Axis.Y, m.Axis.Z]
    got = lifecycle.timed_of_phase(session, unit, road.id, axes)
    for axis in axes:
        want = [x for x in lifecycle.life_cycle(session, unit, axis)
                if x.environment.phase_id == road.id and x.environment.kind in lifecycle.TIMED]
        assert [(x.environment.id, x.revision.id, x.revision.number, x.revision.spec)
                for x in got[axis]] == [
            (x.environment.id, x.revision.id, x.revision.number, x.revision.spec)
            for x in want]
        assert lifecycle.time_counted_twice(got[axis]) == lifecycle.time_counted_twice(want)
    assert [x.environment.name for x in got[m.Axis.Z]] == ["road spec", "road all"]
    for env in (spec, gone):
        assert environments.environment_read(session, env.id) == \
            environments.read_environment(session, env, with_warnings=True)
    # shares 0.5 + 0.7 = 1.2 on Z (hand sum)
    assert "together fill 1.2 times" in environments.environment_read(session, spec.id).warnings[0]
