"""Environments: create, revise (never edit), history, compare; bad data refused."""

from __future__ import annotations

import math

import pytest

from qualplan.planning import environments as envs
from qualplan.planning import schemas as s
from qualplan.planning.errors import Conflict, PermissionDenied, ValidationFailed, VersionMismatch
from qualplan.store import models as m
from qualplan.store.repositories import EventRepository

# GSFC-STD-7000 (GEVS) Table 2.4-3 component qualification, printed 14.1 g rms
# (GSFC-STD-7000 Table 2.4-3; recomputed 14.1356 g rms).
GEVS_QUAL = {"freq_hz": [20.0, 50.0, 800.0, 2000.0], "asd_g2_hz": [0.026, 0.16, 0.16, 0.026]}
GEVS_ACC = {"freq_hz": [20.0, 50.0, 800.0, 2000.0], "asd_g2_hz": [0.013, 0.08, 0.08, 0.013]}


def _create(session, actor, unit, phase, data=GEVS_ACC, name="launch random"):
    return envs.create_environment(session, actor, s.EnvironmentCreate(
        product_id=unit.id, phase_id=phase.id, name=name, kind=m.EnvironmentKind.random,
        axis=m.Axis.Z, source="customer spec", data=data))


def test_create_revise_history_compare(session, engineer, unit, road):
    env = _create(session, engineer, unit, road)
    rev2 = envs.revise_environment(session, engineer, env.id, s.RevisionIn(
        data=GEVS_QUAL, note="customer raised the level", expected_revision=1))
    assert rev2.number == 2 and rev2.author == "eve"
    hist = envs.history(session, env.id)
    assert [h.number for h in hist] == [1, 2]
    # printed 10.0 and 14.1 g rms (GEVS Table 2.4-3), recomputed 9.9954 / 14.1356
    assert hist[0].summary["grms"]["value"] == pytest.approx(9.9954, rel=1e-4)
    assert hist[1].summary["grms"]["unit"] == "g rms"
    cmp = envs.compare(session, env.id, 1, 2)
    # Qualification is exactly twice acceptance in PSD at every breakpoint: +3.0103 dB
    # everywhere (closed form).
    assert cmp.max_difference_db == pytest.approx(10 * math.log10(2), abs=1e-9)
    actions = [e.action for e in EventRepository(session).list(entity="environment",
                                                                 entity_id=env.id)]
    assert actions.count("revise") == 2 and "create" in actions


def test_identical_revision_and_stale_expected_revision_refused(session, engineer, unit, road):
    env = _create(session, engineer, unit, road)
    with pytest.raises(Conflict, match="identical to revision 1"):
        envs.revise_environment(session, engineer, env.id, s.RevisionIn(data=GEVS_ACC))
    envs.revise_environment(session, engineer, env.id, s.RevisionIn(data=GEVS_QUAL))
    with pytest.raises(VersionMismatch):
        envs.revise_environment(session, engineer, env.id, s.RevisionIn(
            data={"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01]}, expected_revision=1))


@pytest.mark.parametrize("data, field", [
    ({"freq_hz": [20.0, 20.0, 2000.0], "asd_g2_hz": [0.01, 0.02, 0.01]}, "data.freq_hz[1]"),
    ({"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, -0.01]}, "data.asd_g2_hz[1]"),
    ({"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, float("nan")]}, "data.asd_g2_hz[1]"),
    ({"freq_hz": [20.0], "asd_g2_hz": [0.01]}, "data.freq_hz"),
    ({"freq_hz": [20.0, 2000.0]}, "data.asd_g2_hz"),
    ({"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01], "grms": 3}, "data.grms"),
])
def test_bad_random_data_names_the_field(session, engineer, unit, road, data, field):
    with pytest.raises(ValidationFailed) as exc:
        _create(session, engineer, unit, road, data=data, name="bad")
    assert exc.value.field == field


def test_viewer_cannot_create(session, viewer, unit, road):
    with pytest.raises(PermissionDenied, match="engineer"):
        _create(session, viewer, unit, road)


def test_sine_and_shock_environments(session, engineer, unit, road):
    sine = envs.create_environment(session, engineer, s.EnvironmentCreate(
        product_id=unit.id, phase_id=road.id, name="engine sine", kind=m.EnvironmentKind.sine,
        axis=m.Axis.X, data={"bands": [
            # 2 g at 20 Hz in mm peak-to-peak, X = 2 A g0 / (2 pi f)^2 (closed form): the
            # bands meet at the crossover
            {"f_lo_hz": 5.0, "f_hi_hz": 20.0, "quantity": "displacement",
             "amplitude": 2e3 * 2.0 * 9.80665 / (2 * 3.141592653589793 * 20.0) ** 2,
             "measure": "peak_to_peak"},
            {"f_lo_hz": 20.0, "f_hi_hz": 100.0, "quantity": "acceleration", "amplitude": 2.0}],
            "sweep": {"rate_oct_per_min": 2.0, "direction": "up", "sweeps": 1}}))
    hist = envs.history(session, sine.id)
    # sweep 5-100 Hz at 2 oct/min: 60 log2(20) / 2 = 129.66 s (closed form)
    assert hist[0].summary["sweep_time"]["value"] == pytest.approx(129.66, abs=0.01)
    shock = envs.create_environment(session, engineer, s.EnvironmentCreate(
        product_id=unit.id, phase_id=road.id, name="drop", kind=m.EnvironmentKind.shock,
        axis=m.Axis.X, data={"freq_hz": [100.0, 1000.0, 10000.0], "accel_g": [20.0, 500.0, 500.0],
                             "q": 10}))
    assert envs.history(session, shock.id)[0].summary["peak_srs"]["value"] == 500.0
