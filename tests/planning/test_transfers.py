"""Environments down the product tree: mountings, rules, transferred environments."""

from __future__ import annotations

import math

import numpy as np
import pytest

from qualplan.dynamics import psd
from qualplan.planning import catalog, environments, levels, policies, transfers
from qualplan.planning import schemas as s
from qualplan.planning.errors import Conflict, ValidationFailed
from qualplan.store import models as m

RANDOM = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04], "duration_s": 120.0}


@pytest.fixture
def tree(session, engineer, program, road):
    pod = catalog.create_product(session, engineer, s.ProductCreate(
        program_id=program.id, name="Sensor pod", mass_kg=45.0))
    unit = catalog.create_product(session, engineer, s.ProductCreate(
        program_id=program.id, name="Pod computer", parent_id=pod.id, mass_kg=8.0))
    envs = {}
    for ax, level in (("X", 0.01), ("Y", 0.02), ("Z", 0.04)):
        envs[ax] = environments.create_environment(session, engineer, s.EnvironmentCreate(
            product_id=pod.id, phase_id=road.id, name=f"road {ax}", kind=m.EnvironmentKind.random,
            axis=m.Axis(ax), data={**RANDOM, "asd_g2_hz": [level, level]}))
    return {"pod": pod, "unit": unit, "envs": envs}


def _zone(session, engineer, program, gain=(1.0, 4.0, 1.0)):
    return transfers.create_rule(session, engineer, transfers.RuleCreate(
        program_id=program.id, name="pod shelf zone", kind="zone_transmissibility",
        spec={"freq_hz": [20.0, 200.0, 2000.0], "gain": list(gain)}, basis="test",
        provenance="low-level survey of the pod shelf, invented for the test"))


def test_transfer_through_mounting_and_zone(session, engineer, program, tree):
    unit, envs = tree["unit"], tree["envs"]
    transfers.set_mounting(session, engineer, unit.id,
                           transfers.MountingIn(axes={"X": "-Z", "Y": "X", "Z": "-Y"}))
    zone = _zone(session, engineer, program)
    rev = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="road X (pod shelf)", axis=m.Axis.X,
        parent_environment_ids=[envs["Z"].id], rule_ids=[zone.id]))
    # unit X = pod -Z: the pod's Z ASD 0.04 g^2/Hz, times |T|^2 = 16 at 200 Hz
    assert psd.asd_at(rev.spec["freq_hz"], rev.spec["asd_g2_hz"], 200.0) == pytest.approx(0.64)
    assert psd.asd_at(rev.spec["freq_hz"], rev.spec["asd_g2_hz"], 20.0) == pytest.approx(0.04)
    assert rev.spec["duration_s"] == 120.0
    env = rev.environment
    assert env.product_id == unit.id and env.source == "transferred"
    assert env.phase_id == envs["Z"].phase_id
    # listing: own/inherited/transferred/replaced
    rows = {r.name: r for r in transfers.environments_for(session, unit.id)}
    assert rows["road X (pod shelf)"].origin == "transferred"
    assert rows["road X (pod shelf)"].through[1].startswith("pod shelf zone r1 (test)")
    assert rows["road Z"].origin == "replaced" and rows["road X"].origin == "inherited"
    assert rows["road X"].notes  # pod axes, while the unit is rotated
    # the replaced parent environment leaves the unit's life cycle, the transferred joins
    from qualplan.planning import coverage
    life = {x.environment.name for x in coverage.life_cycle(session, unit, m.Axis.X)}
    assert "road Z" not in life and "road X (pod shelf)" in life


def test_rotated_mounting_sums_parent_axes(session, engineer, program, tree):
    unit, envs = tree["unit"], tree["envs"]
    c, sn = math.cos(math.radians(30)), math.sin(math.radians(30))
    # unit X in the pod's X-Y plane at 30 degrees from pod X (rotation about Z)
    transfers.set_mounting(session, engineer, unit.id, transfers.MountingIn(
        matrix=[[c, sn, 0.0], [-sn, c, 0.0], [0.0, 0.0, 1.0]]))
    with pytest.raises(ValidationFailed) as e:  # pod Z is at right angles to unit X
        transfers.derive_transferred(session, engineer, transfers.TransferCreate(
            product_id=unit.id, name="road X", axis=m.Axis.X,
            parent_environment_ids=[envs["X"].id, envs["Y"].id, envs["Z"].id]))
    assert e.value.field == "parent_environment_ids[2]"
    rev = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="road X", axis=m.Axis.X,
        parent_environment_ids=[envs["X"].id, envs["Y"].id]))
    # direct: cos^2 30 x 0.01 + sin^2 30 x 0.02 = 0.75 x 0.01 + 0.25 x 0.02 = 0.0125
    np.testing.assert_allclose(rev.spec["asd_g2_hz"], 0.0125, rtol=1e-12)
    assert "uncorrelated" in rev.note
    with pytest.raises(ValidationFailed, match="different inputs"):
        transfers.derive_transferred(session, engineer, transfers.TransferCreate(
            product_id=unit.id, name="road all", axis=m.Axis.all,
            parent_environment_ids=[envs["X"].id, envs["Y"].id, envs["Z"].id]))


def test_mass_attenuation_rule_needs_random_and_mass(session, engineer, program, tree):
    unit, envs = tree["unit"], tree["envs"]
    rule = transfers.create_rule(session, engineer, transfers.RuleCreate(
        program_id=program.id, name="shelf mass loading", kind="mass_attenuation",
        spec={"method": "mass_loading", "mounting_mass_kg": 16.0}, basis="analysis"))
    rev = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="road Z", axis=m.Axis.Z,
        parent_environment_ids=[envs["Z"].id], rule_ids=[rule.id]))
    # Ms / (Ms + Mc) = 16 / 24 in acceleration -> ASD x (2/3)^2 (Newton's second law)
    np.testing.assert_allclose(rev.spec["asd_g2_hz"], 0.04 * (2 / 3) ** 2, rtol=1e-12)
    with pytest.raises(ValidationFailed) as e:
        transfers.create_rule(session, engineer, transfers.RuleCreate(
            program_id=program.id, name="bad", kind="mass_attenuation",
            spec={"method": "mass_loading"}, basis="analysis"))
    assert e.value.field == "spec.mounting_mass_kg"


def test_parent_revision_makes_transferred_environment_and_its_level_stale(
        session, engineer, program, tree):
    unit, envs = tree["unit"], tree["envs"]
    zone = _zone(session, engineer, program)
    rev = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="road Z (shelf)", axis=m.Axis.Z,
        parent_environment_ids=[envs["Z"].id], rule_ids=[zone.id]))
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    level = levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="random Z", kind="random", axis=m.Axis.Z,
        revision_ids=[rev.id], policy_id=gevs.id))
    assert levels.staleness(session, level) == []
    environments.revise_environment(session, engineer, envs["Z"].id, s.RevisionIn(
        data={**RANDOM, "asd_g2_hz": [0.05, 0.05]}, note="new road survey"))
    row = {r.name: r for r in transfers.environments_for(session, unit.id)}["road Z (shelf)"]
    assert row.stale and "has revision 2" in row.stale_reasons[0]
    reasons = levels.staleness(session, level)
    assert any("road Z (shelf)" in r and "has revision 2" in r for r in reasons)
    # re-deriving makes revision 2 of the transferred environment, current again
    rev2 = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="road Z (shelf)", axis=m.Axis.Z,
        parent_environment_ids=[envs["Z"].id], rule_ids=[zone.id]))
    assert rev2.number == 2
    assert transfers.derivation_staleness(session, rev2) == []
    with pytest.raises(Conflict, match="nothing changed"):
        transfers.derive_transferred(session, engineer, transfers.TransferCreate(
            product_id=unit.id, name="road Z (shelf)", axis=m.Axis.Z,
            parent_environment_ids=[envs["Z"].id], rule_ids=[zone.id]))
    # a rule revision and a mounting change also make it stale
    transfers.revise_rule(session, engineer, zone.id, transfers.RuleRevisionIn(
        spec={"freq_hz": [20.0, 200.0, 2000.0], "gain": [1.0, 3.0, 1.0]}, basis="analysis",
        note="finite-element zone response"))
    transfers.set_mounting(session, engineer, unit.id,
                           transfers.MountingIn(axes={"X": "Y", "Y": "Z", "Z": "X"}))
    reasons = transfers.derivation_staleness(session, rev2)
    assert any("transfer rule 'pod shelf zone' has revision 2" in r for r in reasons)
    assert any("mounting" in r for r in reasons)


def test_transfer_refusals_name_the_field(session, engineer, program, tree, unit):
    envs = tree["envs"]
    with pytest.raises(ValidationFailed) as e:
        transfers.set_mounting(session, engineer, tree["unit"].id,
                               transfers.MountingIn(axes={"X": "X", "Y": "Y", "Z": "-Z"}))
    assert e.value.field == "matrix"
    with pytest.raises(ValidationFailed) as e:
        transfers.set_mounting(session, engineer, unit.id,
                               transfers.MountingIn(axes={"X": "X", "Y": "Y", "Z": "Z"}))
    assert e.value.field == "product_id"  # no parent
    with pytest.raises(ValidationFailed) as e:
        transfers.derive_transferred(session, engineer, transfers.TransferCreate(
            product_id=tree["unit"].id, name="dup", axis=m.Axis.X,
            parent_environment_ids=[envs["X"].id, envs["X"].id]))
    assert e.value.field == "parent_environment_ids[1]"
    with pytest.raises(ValidationFailed) as e:
        transfers.create_rule(session, engineer, transfers.RuleCreate(
            program_id=program.id, name="zone", kind="zone_transmissibility",
            spec={"freq_hz": [20.0, 10.0], "gain": [1.0, 2.0]}, basis="handbook"))
    assert e.value.field.startswith("spec.freq_hz")


def test_sine_and_shock_transfer(session, engineer, program, tree, road):
    pod, unit = tree["pod"], tree["unit"]
    sine = environments.create_environment(session, engineer, s.EnvironmentCreate(
        product_id=pod.id, phase_id=road.id, name="sine all", kind=m.EnvironmentKind.sine,
        axis=m.Axis.all, data={"bands": [{"f_lo_hz": 5.0, "f_hi_hz": 2000.0,
                                          "quantity": "acceleration", "amplitude": 1.0}]}))
    shock = environments.create_environment(session, engineer, s.EnvironmentCreate(
        product_id=pod.id, phase_id=road.id, name="shock Z", kind=m.EnvironmentKind.shock,
        axis=m.Axis.Z, data={"freq_hz": [100.0, 1000.0, 2000.0], "accel_g": [10.0, 100.0, 100.0],
                             "q": 10.0}))
    zone = transfers.create_rule(session, engineer, transfers.RuleCreate(
        program_id=program.id, name="zone", kind="zone_transmissibility",
        spec={"freq_hz": [5.0, 200.0, 2000.0], "gain": [1.0, 4.0, 1.0]}, basis="handbook"))
    rev = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="sine", axis=m.Axis.all,
        parent_environment_ids=[sine.id], rule_ids=[zone.id]))
    bands = rev.spec["bands"]
    # split at 200 Hz; each piece scaled by the largest |T| on it (4 at 200 Hz)
    assert [b["amplitude"] for b in bands] == [4.0, 4.0]
    rev = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=unit.id, name="shock Z", axis=m.Axis.Z,
        parent_environment_ids=[shock.id], rule_ids=[zone.id]))
    f = np.array(rev.spec["freq_hz"])
    a = np.array(rev.spec["accel_g"])
    # SRS x |T|: 1000 Hz -> |T| = 4 (2000/1000)^(-log 4/log 10) ... direct log-log value
    t1000 = 4.0 * (1000 / 200) ** (math.log(1 / 4) / math.log(10))
    assert a[f.tolist().index(1000.0)] == pytest.approx(100 * t1000)
    assert rev.spec["q"] == 10.0


def test_transfer_from_a_grandparent_composes_the_mountings(session, engineer, program, tree):
    # board in unit: board X = unit Y; unit in pod: unit X = pod -Z, unit Y = pod X
    # -> board X = pod X (by hand), so the board's X takes the pod's X (0.01 g^2/Hz)
    unit, envs = tree["unit"], tree["envs"]
    board = catalog.create_product(session, engineer, s.ProductCreate(
        program_id=program.id, name="board", parent_id=unit.id, mass_kg=0.2))
    transfers.set_mounting(session, engineer, unit.id,
                           transfers.MountingIn(axes={"X": "-Z", "Y": "X", "Z": "-Y"}))
    transfers.set_mounting(session, engineer, board.id,
                           transfers.MountingIn(axes={"X": "Y", "Y": "Z", "Z": "X"}))
    rev = transfers.derive_transferred(session, engineer, transfers.TransferCreate(
        product_id=board.id, name="road X", axis=m.Axis.X,
        parent_environment_ids=[envs["X"].id]))
    np.testing.assert_allclose(rev.spec["asd_g2_hz"], 0.01)
    assert transfers.derivation_staleness(session, rev) == []
    transfers.set_mounting(session, engineer, unit.id,
                           transfers.MountingIn(axes={"X": "X", "Y": "Y", "Z": "Z"}))
    assert any("mounting" in r for r in transfers.derivation_staleness(session, rev))
