"""What the overlay plots draw: each input of a level raised by the level's compression
gain, and the dB difference between two environment revisions."""

from __future__ import annotations

import numpy as np
import pytest

from qualplan.planning import environments, levels, policies
from qualplan.planning import schemas as s
from qualplan.reports.charts import tick_labels
from tests.reports.conftest import FLIGHT_X, ROAD_X


def test_inputs_are_compressed_by_the_levels_gain(db):
    session, data = db
    # MIL-STD-810H tailoring compresses the life into the test (514.8 Annex A)
    road, flight = (data["levels"]["random"].recipe["revision_ids"])
    level = levels.derive_level(session, data["engineer"], s.LevelRecipe(
        product_id=data["unit"].id, name="compressed X", kind="random", axis="X",
        revision_ids=[road, flight],
        policy_id=policies.policy_ref(session, "military-810h").id))
    # one time-compression step per input, from its own exposure (514.8 Annex A)
    gains = {st.inputs[0]: st.db for st in levels.result_of(level).steps
             if st.step == "time compression"}
    assert gains and all(g > 0 for g in gains.values())  # the lives outlast the test
    curves = levels.compressed_inputs(session, level)
    assert [c["name"].split(" r")[0] for c in curves] == ["road X", "flight X"]
    for c, spec in zip(curves, [ROAD_X, FLIGHT_X], strict=True):
        gain = gains.get(c["name"].split(",")[0], 0.0)
        if gain:
            assert c["name"].endswith(f"compressed {gain:+.2f} dB")
        assert c["freq_hz"] == spec["freq_hz"]
        # dB on a power quantity (ASD): ratio 10^(dB/10) (IEC 60027-3)
        assert c["values"] == pytest.approx(
            list(np.asarray(spec["asd_g2_hz"]) * 10 ** (gain / 10)), rel=1e-12)
    # the level lies at or above the envelope of the compressed inputs (margin >= 0 dB)
    r = levels.result_of(level)
    for c in curves:
        f = np.asarray(c["freq_hz"])
        inside = (f >= r.freq_hz[0]) & (f <= r.freq_hz[-1])
        lv = np.exp(np.interp(np.log(f[inside]), np.log(r.freq_hz), np.log(r.asd_g2_hz)))
        assert np.all(lv >= np.asarray(c["values"])[inside] * (1 - 1e-9))


def test_revision_difference_curve(db):
    session, data = db
    env = data["flight_x"]
    environments.revise_environment(session, data["engineer"], env.id, s.RevisionIn(
        data={"freq_hz": FLIGHT_X["freq_hz"],
              "asd_g2_hz": [2 * a for a in FLIGHT_X["asd_g2_hz"]]}, note="x2"))
    ra = environments.revision(session, env.id, 1)
    rb = environments.revision(session, env.id, 2)
    grid, diff, _, scale = environments.difference_curve(env.kind, ra, rb)
    # twice the ASD everywhere: 10 log10(2) = +3.0103 dB (closed form)
    assert scale == 10.0 and np.allclose(diff, 10 * np.log10(2), atol=1e-9)


def test_one_tick_label_format_per_axis():
    """Plain numbers when every tick is readable so, else powers of ten for them all."""
    assert tick_labels([0.001, 0.01, 0.1, 1]) == ["0.001", "0.01", "0.1", "1"]
    mixed = tick_labels([1e-4, 5e-4, 1e-3, 5e-3])
    assert all(x.startswith("$") and "10^{" in x for x in mixed), mixed
    assert tick_labels([10, 100, 1000, 10000]) == ["10", "100", "1000", "10000"]
