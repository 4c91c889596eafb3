"""Environments down the product tree (qualplan.dynamics.transfer)."""

import math

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from qualplan.dynamics import psd, sine, srs, transfer
from qualplan.dynamics.errors import InputError

G0 = 9.80665  # standard gravity [m/s^2] (CGPM 1901)


def flat(level, lo=20.0, hi=2000.0):
    return np.array([lo, hi]), np.array([level, level])


# --- axis frames ----------------------------------------------------------------------


def test_signed_permutation_by_hand():
    # unit X along parent -Z, unit Y along parent X, unit Z along parent -Y (worked by hand:
    # rows of direction cosines [0,0,-1], [1,0,0], [0,-1,0], determinant +1).
    fr = transfer.axis_frame({"X": "-Z", "Y": "X", "Z": "-Y"})
    assert fr.matrix.tolist() == [[0, 0, -1], [1, 0, 0], [0, -1, 0]]
    assert fr.is_permutation()
    assert fr.describe() == {"X": "-Z", "Y": "X", "Z": "-Y"}
    parent = {"X": flat(0.01), "Y": flat(0.02), "Z": flat(0.04)}
    child = transfer.map_random(fr, parent)
    assert child["X"][1].tolist() == [0.04, 0.04]  # from parent Z
    assert child["Y"][1].tolist() == [0.01, 0.01]  # from parent X
    assert child["Z"][1].tolist() == [0.02, 0.02]  # from parent Y
    peaks = transfer.map_peak(fr, {"X": flat(1.0), "Y": flat(2.0), "Z": flat(4.0)})
    assert peaks["X"][1].max() == 4.0 and peaks["Y"][1].max() == 1.0
    assert peaks["Z"][1].max() == 2.0


def test_all_axis_input_is_unchanged_on_every_child_axis():
    # an "all" input applies to each parent axis; each row of direction cosines has unit
    # norm, so sum_j c_ij^2 S = S for any rotation (closed form).
    r = Rotation.from_euler("zyx", [30, 20, 10], degrees=True).as_matrix()
    fr = transfer.axis_frame(r)
    out = transfer.map_random(fr, {ax: flat(0.05) for ax in "XYZ"})
    for ax in "XYZ":
        np.testing.assert_allclose(out[ax][1], 0.05, rtol=1e-12)


@pytest.mark.parametrize("bad, field", [
    ({"X": "X", "Y": "Y", "Z": "-Z"}, "matrix"),  # mirror: determinant -1
    ({"X": "X", "Y": "X", "Z": "Z"}, "axes"),  # parent X used twice
    ({"X": "X", "Y": "Q", "Z": "Z"}, "axes.Y"),
    ({"X": "X", "Y": "Y"}, "axes"),
    ([[1, 0, 0], [0, 1, 0], [0, 0.5, 1]], "matrix"),  # not orthonormal
])
def test_bad_frames_name_the_field(bad, field):
    with pytest.raises(InputError) as e:
        transfer.axis_frame(bad)
    assert e.value.field == field


def test_rotated_mounting_random_against_direct_vector_calculation():
    # Direct calculation: the child axis signal is the projection e_i . a(t) of the parent
    # acceleration vector; for uncorrelated parent axes its covariance is R diag(s^2) R^T
    # (Bendat & Piersol, Random Data, 4th ed., linear combinations). Checked two ways:
    # the exact covariance matrix product, and a simulated vector signal (seeded).
    r = Rotation.from_euler("zx", [35, 25], degrees=True).as_matrix()
    fr = transfer.axis_frame(r)
    levels = {"X": 0.01, "Y": 0.04, "Z": 0.09}
    out = transfer.map_random(fr, {ax: flat(lv) for ax, lv in levels.items()})
    cov_parent = np.diag([levels[a] for a in "XYZ"])
    cov_child = r @ cov_parent @ r.T
    for i, ax in enumerate("XYZ"):
        np.testing.assert_allclose(out[ax][1], cov_child[i, i], rtol=1e-12)

    # simulation: white noise of one-sided ASD S over 0..fs/2 has variance S fs / 2
    rng = np.random.default_rng(18)
    fs, n = 4096.0, 2 ** 18
    sig = np.stack([rng.standard_normal(n) * math.sqrt(levels[a] * fs / 2) for a in "XYZ"])
    child_sig = r @ sig
    for i, ax in enumerate("XYZ"):
        expected = psd.grms(*flat(out[ax][1][0], 1e-3, fs / 2)) ** 2
        assert np.var(child_sig[i]) == pytest.approx(expected, rel=0.02)  # ~5 sigma of N


def test_rotated_mounting_random_with_different_shapes():
    # two shaped parent spectra; exact weighted sum checked at off-grid frequencies; the
    # log-log breakpoints returned lie at or above the exact sum (convexity).
    r = Rotation.from_euler("y", 40, degrees=True).as_matrix()
    fr = transfer.axis_frame(r)
    px = (np.array([20, 80, 500, 2000.0]), np.array([0.005, 0.04, 0.04, 0.002]))
    pz = (np.array([20, 150, 2000.0]), np.array([0.01, 0.1, 0.001]))
    out = transfer.map_random(fr, {"X": px, "Z": pz})
    f = np.geomspace(21, 1990, 301)
    exact = r[0, 0] ** 2 * psd.asd_at(*px, f) + r[0, 2] ** 2 * psd.asd_at(*pz, f)
    got = psd.asd_at(*out["X"], f)
    assert np.all(got >= exact * (1 - 1e-12))
    assert np.max(got / exact) < 1.01  # 24 points per octave: within 1 %
    assert "Y" not in out  # child Y is along parent Y, which has no input


def test_rotated_mounting_sine_srs_is_envelope_of_projections():
    # direct calculation: each parent-axis event alone projects on child axis i with the
    # factor |e_i . u_j|; the child must cover the worst event (envelope).
    r = Rotation.from_euler("z", 30, degrees=True).as_matrix()
    fr = transfer.axis_frame(r)
    px = (np.array([100.0, 1000, 10000]), np.array([50.0, 1000, 1000]))
    py = (np.array([100.0, 2000, 10000]), np.array([100.0, 800, 800]))
    out = transfer.map_peak(fr, {"X": px, "Y": py})
    f = np.geomspace(100, 10000, 400)
    for i, ax in enumerate("XY"):
        e = r[i]
        direct = np.maximum(abs(e @ [1, 0, 0]) * srs.SrsProfile(*px).value_at(f),
                            abs(e @ [0, 1, 0]) * srs.SrsProfile(*py).value_at(f))
        np.testing.assert_allclose(srs.SrsProfile(*out[ax]).value_at(f), direct, rtol=1e-9)


# --- zone transmissibility -----------------------------------------------------------

T_TABLE = transfer.GainTable(np.array([10.0, 100.0, 1000.0]), np.array([1.0, 10.0, 1.0]))


def test_transmissibility_on_psd():
    f, a = transfer.apply_gain_asd(*flat(0.01, 10, 1000), T_TABLE)
    assert psd.asd_at(f, a, 100.0) == pytest.approx(1.0)  # 0.01 x 10^2
    # log-log midpoint of 10..100 Hz: |T| = sqrt(10), so ASD x 10 (closed form)
    assert psd.asd_at(f, a, math.sqrt(1000.0)) == pytest.approx(0.1, rel=1e-12)
    assert psd.asd_at(f, a, 10.0) == pytest.approx(0.01)


def test_transmissibility_on_sine():
    spec = sine.sine_spec(10.0, 1000.0, [("acceleration", 2.0)])
    tab = transfer.apply_gain_sine(spec, T_TABLE)
    assert float(tab.accel_g(100.0)) == pytest.approx(20.0)  # 2 g x |T| = 10
    assert float(tab.accel_g(math.sqrt(1000.0))) == pytest.approx(2 * math.sqrt(10), rel=1e-9)
    # a displacement band: a(f) = X (2 pi f)^2 / g0, times |T| (closed form)
    spec2 = sine.sine_spec(10.0, 100.0, [("displacement", 1e-3)])
    tab2 = transfer.apply_gain_sine(spec2, T_TABLE)
    f = 50.0
    t = 10 ** (math.log10(f / 10.0))  # |T| rises one decade per decade: T(50) = 5
    assert float(tab2.accel_g(f)) == pytest.approx(1e-3 * (2 * math.pi * f) ** 2 / G0 * t,
                                                   rel=1e-6)


def test_transmissibility_on_sine_bands_is_an_upper_bound():
    # band form: each piece scaled by the largest |T| at its ends (|T| monotonic between
    # table points), so a(f) |T(f)| <= result everywhere; equal at the table points where
    # |T| peaks (100 Hz: 2 g x 10).
    spec = sine.sine_spec(10.0, 1000.0, [("displacement", 2e-3), ("acceleration", 2.0)])
    out = transfer.apply_gain_sine_bands(spec, T_TABLE)
    f = np.geomspace(10, 1000, 997)
    exact = spec.accel_g(f) * T_TABLE.at(f)
    assert np.all(out.accel_g(f) >= exact * (1 - 1e-12))
    assert float(out.accel_g(100.0)) == pytest.approx(20.0)
    # crossover sqrt(2 g0 / 2 mm) / (2 pi) = 15.76 Hz: the displacement band has no table
    # point inside, the acceleration band is split at 100 Hz
    assert [b.quantity for b in out.bands] == ["displacement", "acceleration", "acceleration"]
    assert transfer.scale_sine_bands(spec, 0.5).accel_g(500.0) == pytest.approx(1.0)


def test_transmissibility_on_srs():
    f, a = transfer.apply_gain_peak(np.array([10.0, 1000.0]), np.array([5.0, 500.0]), T_TABLE)
    prof = srs.SrsProfile(f, a)
    assert float(prof.value_at(100.0)) == pytest.approx(50.0 * 10.0)  # 50 g x 10
    assert float(prof.value_at(1000.0)) == pytest.approx(500.0)


def test_transmissibility_must_cover_the_band():
    with pytest.raises(InputError, match="must cover the environment band"):
        transfer.apply_gain_asd(*flat(0.01, 5, 1000), T_TABLE)


# --- mass attenuation ----------------------------------------------------------------


def test_gevs_mass_reduction():
    # 10 log10(M / 22.7): twice the threshold mass is 3.01 dB (closed form of the rule,
    # rule values from memory of GSFC-STD-7000A 2.4.2.5, to be checked)
    assert transfer.gevs_mass_reduction_db(45.4).reduction_db == pytest.approx(3.0103, abs=1e-4)
    assert transfer.gevs_mass_reduction_db(10.0).reduction_db == 0.0
    assert transfer.gevs_mass_reduction_db(120.0).reduction_db == 6.0  # cap
    with pytest.raises(InputError) as e:
        transfer.gevs_mass_reduction_db(200.0)
    assert e.value.field == "mass_kg"
    f, a = transfer.gevs_mass_reduction_db(45.4).apply(*flat(0.16, 50, 800))
    np.testing.assert_allclose(a, 0.08, rtol=1e-4)


def test_mass_loading_reduction():
    # acceleration ratio Ms / (Ms + Mc) (Newton's second law): Mc = Ms/2 -> 20 log10 1.5
    r = transfer.mass_loading_reduction_db(4.0, 8.0)
    assert r.reduction_db == pytest.approx(20 * math.log10(1.5))
    assert transfer.mass_loading_reduction_db(8.0, 8.0).reduction_db == 6.0  # 6.02 capped


# --- force limits ---------------------------------------------------------------------


def test_semi_empirical_force_limit_worked_example():
    # Invented example computed by hand (not the handbook's): M0 = 10 kg, C^2 = 2,
    # f0 = 100 Hz, S_AA = 0.04 g^2/Hz flat 20-2000 Hz, roll-off (f0/f)^2.
    # Below f0: S_FF = 2 x 10^2 x 0.04 x 9.80665^2 = 8 x 96.17038 = 769.363 N^2/Hz.
    # At 200 Hz: 769.363 / 4 = 192.341; at 2000 Hz: 769.363 / 400 = 1.92341 N^2/Hz.
    # rms force: 769.363 x 80 + 769.363 x 100^2 x (1/100 - 1/2000) = 61549.0 + 73089.5
    #            = 134638.5 N^2 -> 366.93 N.
    fl = transfer.semi_empirical_force_limit(*flat(0.04), mass_kg=10.0, c2=2.0, f0_hz=100.0)
    assert fl.at(50.0) == pytest.approx(769.363, rel=1e-6)
    assert fl.at(100.0) == pytest.approx(769.363, rel=1e-6)
    assert fl.at(200.0) == pytest.approx(192.341, rel=1e-5)
    assert fl.at(2000.0) == pytest.approx(1.92341, rel=1e-5)
    assert fl.force_rms_n == pytest.approx(366.93, abs=0.01)
    assert fl.rolloff_db_per_oct == pytest.approx(-6.0206, abs=1e-4)
    assert 100.0 in fl.freq_hz.tolist()


# --- notching -------------------------------------------------------------------------


def _direct_apparent_mass(f, modes, residual):
    # independent form: m (wn^2 + 2 j zeta wn w) / (wn^2 - w^2 + 2 j zeta wn w)
    w = 2 * np.pi * np.asarray(f)
    total = residual + 0j
    for fn, mk, q in modes:
        wn, z = 2 * np.pi * fn, 1 / (2 * q)
        total = total + mk * (wn ** 2 + 2j * z * wn * w) / (wn ** 2 - w ** 2 + 2j * z * wn * w)
    return np.abs(total)


def test_notch_depth_two_mode_apparent_mass_against_direct_calculation():
    # invented item: 6 kg mode at 120 Hz (Q 10), 2 kg mode at 400 Hz (Q 15), 0.5 kg
    # residual (a residual mass much larger would also be notched at the top of the band,
    # where |M| tends to it while the limit rolls off as (f0/f)^2)
    modes = [(120.0, 6.0, 10.0), (400.0, 2.0, 15.0)]
    residual = 0.5
    m0 = residual + 6.0 + 2.0
    f_spec, s_aa = flat(0.04)
    fl = transfer.semi_empirical_force_limit(f_spec, s_aa, mass_kg=m0, c2=2.0, f0_hz=120.0)
    out = transfer.notch_by_force_limit(
        f_spec, s_aa, fl, [transfer.Mode(*x) for x in modes], residual_mass_kg=residual,
        max_notch_db=10.0)
    m_abs = _direct_apparent_mass(out.freq_hz, modes, residual)
    np.testing.assert_allclose(transfer.apparent_mass_kg(out.freq_hz, [transfer.Mode(*x)
                               for x in modes], residual), m_abs, rtol=1e-12)
    direct = np.minimum(0.04, fl.at(out.freq_hz) / (m_abs ** 2 * G0 ** 2))
    np.testing.assert_allclose(out.values, direct, rtol=1e-9)
    assert len(out.notches) == 2
    for notch, (fn, _, _) in zip(out.notches, modes, strict=True):
        assert notch.f_lo_hz < fn < notch.f_hi_hz
        inside = (out.freq_hz >= notch.f_lo_hz) & (out.freq_hz <= notch.f_hi_hz)
        d = 10 * np.log10(0.04 / direct[inside])
        assert notch.depth_db == pytest.approx(d.max(), abs=1e-9)
        assert abs(notch.f_deepest_hz / fn - 1) < 0.02
    # first mode at 120 Hz: |M| ~ 6 x Q = 60 kg dominates; depth ~ 10 log10(|M|^2/(C^2 M0^2))
    first = out.notches[0]
    at = _direct_apparent_mass([first.f_deepest_hz], modes, residual)[0]
    assert first.depth_db == pytest.approx(10 * math.log10(at ** 2 / (2.0 * m0 ** 2)), abs=1e-9)
    assert first.depth_db > 10.0 and first.exceeds_policy and out.needs_acceptance


def test_random_notch_against_response_limit():
    # SDOF transmissibility Q = 10 at 200 Hz: |T(fn)| = sqrt(1 + Q^2) (Harris, base
    # excitation); input 0.04 g^2/Hz, response limit 1 g^2/Hz:
    # depth = 10 log10(0.04 x 101 / 1) = 6.064 dB at fn; the deepest point is at the peak
    # of |T|, r^2 = (sqrt(1 + 8 zeta^2) - 1) / (4 zeta^2) = 0.995049 (closed form), where
    # |T|^2 = 101.248 and the depth 10 log10(0.04 x 101.248) = 6.0745 dB.
    f = np.geomspace(20, 2000, 2001)
    f = np.unique(np.append(f, 200.0))
    r = f / 200.0
    t = np.sqrt((1 + (r / 10) ** 2) / ((1 - r ** 2) ** 2 + (r / 10) ** 2))
    out = transfer.notch_random(*flat(0.04), 1.0, transfer.GainTable(f, t), max_notch_db=3.0)
    assert len(out.notches) == 1
    n = out.notches[0]
    z = 0.05
    r2 = (math.sqrt(1 + 8 * z * z) - 1) / (4 * z * z)
    t2 = (1 + 4 * z * z * r2) / ((1 - r2) ** 2 + 4 * z * z * r2)
    assert n.depth_db == pytest.approx(10 * math.log10(0.04 * t2), abs=0.002)
    at_fn = out.values[np.searchsorted(out.freq_hz, 200.0)]
    assert 10 * math.log10(0.04 / at_fn) == pytest.approx(10 * math.log10(0.04 * 101), abs=1e-6)
    assert n.exceeds_policy
    # width: where 0.04 |T|^2 > 1 (direct, on the same grid)
    above = f[0.04 * t ** 2 > 1.0]
    assert n.f_lo_hz <= above[0] and n.f_hi_hz >= above[-1]
    assert n.width_oct == pytest.approx(math.log2(n.f_hi_hz / n.f_lo_hz))


def test_sine_notch_same_implementation_same_depth():
    # sine notch of a 1 g input with a 5 g response limit through an SDOF |T| (Q 10):
    # checked against min(a, L/|T|) computed directly (quasi-steady slow sweep).
    f = np.geomspace(5, 2000, 801)
    r = f / 200.0
    t = np.sqrt((1 + (r / 10) ** 2) / ((1 - r ** 2) ** 2 + (r / 10) ** 2))
    spec = sine.sine_spec(5.0, 2000.0, [("acceleration", 1.0)])
    out = transfer.notch_sine(spec, 5.0, transfer.GainTable(f, t), max_notch_db=12.0)
    tv = np.interp(np.log(out.freq_hz), np.log(f), np.log(t))
    np.testing.assert_allclose(out.values, np.minimum(1.0, 5.0 / np.exp(tv)), rtol=1e-9)
    assert len(out.notches) == 1 and not out.needs_acceptance
    assert out.notches[0].depth_db == pytest.approx(20 * math.log10(np.exp(tv).max() / 5.0),
                                                    abs=1e-9)
