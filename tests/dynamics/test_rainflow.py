"""Rainflow counting (qualplan.dynamics.rainflow)."""

import numpy as np
import pytest
import rainflow as rainflow_ref  # reference library (test-only dependency)
from hypothesis import given, settings
from hypothesis import strategies as st

from qualplan.dynamics import rainflow
from qualplan.dynamics.errors import InputError

ASTM_HISTORY = [-2, 1, -3, 5, -1, 3, -4, 4, -2]


def test_astm_e1049_worked_example():
    # ASTM E1049-85 (R2017) sec. 5.4.4 worked example:
    # ranges {3: 0.5, 4: 1.5, 6: 0.5, 8: 1.0, 9: 0.5} (4 cycles in total).
    c = rainflow.count(ASTM_HISTORY)
    totals = {}
    for rng, _mean, n in c:
        totals[rng] = totals.get(rng, 0.0) + n
    assert totals == {3.0: 0.5, 4.0: 1.5, 6.0: 0.5, 8.0: 1.0, 9.0: 0.5}
    assert c[:, 2].sum() == 4.0
    # the one full cycle is the 4-unit range between -1 and 3 (mean 1): ASTM E1049 Fig. 6
    full = c[c[:, 2] == 1.0]
    assert full.tolist() == [[4.0, 1.0, 1.0]]


def test_astm_means_and_order_equal_reference_library():
    # reference library rainflow 3.2 (extract_cycles), same E1049 procedure
    ref = [c[:3] for c in rainflow_ref.extract_cycles(ASTM_HISTORY)]
    assert rainflow.count(ASTM_HISTORY).tolist() == [list(map(float, r)) for r in ref]


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_equal_cycle_for_cycle_to_reference_on_random_data(seed):
    # reference library rainflow 3.2: identical sequence of (range, mean, count)
    rng = np.random.default_rng(seed)
    x = np.cumsum(rng.standard_normal(20_000)) + rng.standard_normal(20_000)
    ref = np.array([c[:3] for c in rainflow_ref.extract_cycles(x)])
    ours = rainflow.count(x)
    assert ours.shape == ref.shape
    np.testing.assert_array_equal(ours, ref)


def test_plateaus_and_quantised_data_equal_reference():
    # reference library rainflow 3.2 on integer data with many repeated samples
    rng = np.random.default_rng(5)
    x = rng.integers(-3, 4, size=5000).astype(float)
    x = np.repeat(x, rng.integers(1, 4, size=x.size))
    ref = np.array([c[:3] for c in rainflow_ref.extract_cycles(x)])
    np.testing.assert_array_equal(rainflow.count(x), ref)


def test_damage_equals_miner_sum_of_counted_cycles():
    # closed form: D = sum n_i (range_i / 2)^b over the counted cycles
    rng = np.random.default_rng(7)
    x = rng.standard_normal(10_000)
    c = rainflow.count(x)
    d = np.sum(c[:, 2] * (c[:, 0] / 2) ** 6.4)
    assert rainflow.damage(x, 6.4) == pytest.approx(d, rel=1e-12)


def test_reversals_keep_ends_and_merge_plateaus():
    # closed form (definition of a turning point)
    assert rainflow.reversals([0, 1, 1, 2, 1, 1, 0, 3]).tolist() == [0, 2, 0, 3]
    assert rainflow.reversals([5.0]).tolist() == [5.0]


def test_short_series():
    assert rainflow.count([1.0]).shape == (0, 3)
    # closed form: one half cycle of range 2
    assert rainflow.count([1.0, -1.0]).tolist() == [[2.0, 0.0, 0.5]]


def test_bad_input():
    with pytest.raises(InputError, match="finite"):
        rainflow.count([0.0, np.nan, 1.0])
    with pytest.raises(InputError, match="one-dimensional"):
        rainflow.count(np.zeros((3, 3)))
    with pytest.raises(InputError, match="b="):
        rainflow.damage([0.0, 1.0, 0.0], 0.0)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1e3, 1e3, allow_nan=False), min_size=3, max_size=60))
def test_property_equal_to_reference_and_counts_every_range(xs):
    # reference library rainflow 3.2 on arbitrary short histories
    ref = [list(map(float, c[:3])) for c in rainflow_ref.extract_cycles(xs)]
    ours = rainflow.count(xs)
    assert ours.tolist() == ref
    # closed form: the count of a history of m reversals spans m - 1 half ranges
    m = rainflow.reversals(xs).size
    assert ours[:, 2].sum() * 2 == pytest.approx(m - 1)
