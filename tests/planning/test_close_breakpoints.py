"""A random test level carries no two breakpoints a controller cannot tell apart: the
envelope of a flat spectrum (+3 dB margin: 10^0.3 x 0.01 = 0.019953 g^2/Hz) with the
policy's minimum level (0.02 g^2/Hz at 20 Hz) has an edge step of 0.01 dB at 20 Hz, which
left breakpoints at 19.99998 and 20 Hz in the issued table. Rule (our own): a breakpoint
within 1/1000 octave of a neighbour and at most 0.1 dB under its neighbours' log-log
line is dropped;
the level only rises."""

from __future__ import annotations

import numpy as np

from qualplan.dynamics import psd
from qualplan.planning import catalog, environments, levels, policies
from qualplan.planning import schemas as s
from qualplan.planning.levels import merge_close_breakpoints
from qualplan.store import models as m


def test_a_valley_micro_hertz_from_its_neighbour_is_dropped_and_the_level_only_rises():
    f = np.array([10.0, 19.99998, 20.0, 80.0, 500.0, 2000.0])
    a = np.array([0.0199526, 0.0199998, 0.02, 0.08, 0.08, 0.02])
    mf, ma = merge_close_breakpoints(f, a)
    assert mf.tolist() == [10.0, 20.0, 80.0, 500.0, 2000.0]
    # never below the input at any of its breakpoints (log-log interpolation)
    assert np.all(psd.asd_at(mf, ma, f) >= a * (1 - 1e-12))


def test_a_peak_and_well_spaced_breakpoints_are_kept():
    # a 3 dB step within 1/2000 octave: its foot (100 Hz) lies 3 dB under the line from
    # 20 Hz to the top of the step; dropping it would raise 20-100 Hz by up to 3 dB, so
    # both stay (and the top, a peak, is never dropped)
    f = np.array([20.0, 100.0, 100.0 * 2 ** 5e-4, 2000.0])
    a = np.array([0.01, 0.01, 0.02, 0.01])
    mf, ma = merge_close_breakpoints(f, a)
    assert mf.tolist() == f.tolist() and ma.tolist() == a.tolist()
    g = np.array([20.0, 80.0, 500.0, 2000.0])
    assert merge_close_breakpoints(g, np.array([0.01, 0.04, 0.04, 0.01]))[0].tolist() == \
        g.tolist()


def test_the_envelope_with_the_minimum_level_has_no_twin_breakpoints(session, engineer,
                                                                     program, unit):
    phase = catalog.create_phase(session, engineer, s.PhaseCreate(
        program_id=program.id, name="truck", duration_s=28800.0, occurrences=2))
    env = environments.create_environment(session, engineer, s.EnvironmentCreate(
        product_id=unit.id, phase_id=phase.id, name="truck spec", kind=m.EnvironmentKind.random,
        axis=m.Axis.Z, data={"freq_hz": [10.0, 500.0], "asd_g2_hz": [0.01, 0.01]}))
    pol = policies.policy_ref(session, "spaceflight-gevs")
    level = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="truck Z", kind="random", axis=m.Axis.Z,
        revision_ids=[env.revisions[-1].id], policy_id=pol.id))
    r = levels.read_level(session, level).result
    f, a = np.asarray(r.freq_hz), np.asarray(r.asd_g2_hz)
    assert np.min(np.diff(np.log2(f))) >= 1e-3, f.tolist()
    # still at or above the input +3 dB (10^0.3 x 0.01 g^2/Hz, closed form) over 10-500 Hz
    grid = np.geomspace(10.0, 500.0, 200)
    assert np.all(psd.asd_at(f, a, grid) >= 0.01 * 10 ** 0.3 * (1 - 1e-9))
    assert r.verdicts.controllable is True
