"""Equivalence between environments through the FDS and the ERS.

The questions engineers ask of a set of environments and a test:

- which random test PSD, in a chosen duration, produces a target FDS (a life
  cycle's FDS times a margin factor)? :func:`random_test_for_fds`
- does a test cover a set of environments, in fatigue (FDS) and in peak response
  (ERS), with the required margins, and does it over-test? :func:`coverage`
- for a given test level, how long must the test last to reach the life's damage?
  :func:`duration_for_damage`; the power law behind it: :func:`time_compression`
- what sine is equivalent to a low-frequency transient? :func:`sine_equivalent_of_shock`;
  does a random test cover a shock? :func:`random_covers_shock`

All FDS and ERS follow the convention of :mod:`qualplan.dynamics.fatigue`
(pseudo-acceleration in g, damage in g^b with unit material constants); compare
only spectra computed with the same fn grid, Q and b.

dB conventions: an FDS ratio is a ratio of damages and is given as
10 log10(D_test / D_life) (a damage margin factor of 2 is 3.01 dB); its
equivalent level margin, (20 / b) log10(D_test / D_life), is the amplitude
factor that would bring the two damages level. ERS, SRS and sine ratios are
amplitude ratios: 20 log10.

References
----------
.. [1] C. Lalanne, Mechanical Vibration and Shock Analysis, vol. 5
   "Specification Development", ISTE/Wiley, 2009 (test tailoring by ERS and FDS,
   over-test check).
.. [2] MIL-STD-810H (2019), Method 514.8 Annex A, time compression
   t2/t1 = (S1/S2)^m.
.. [3] Henderson & Piersol, Sound and Vibration 29(10), 1995.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qualplan.dynamics import _validate as v
from qualplan.dynamics import extreme, fatigue
from qualplan.dynamics.errors import InputError

__all__ = [
    "EquivalentRandomTest",
    "random_test_for_fds",
    "Coverage",
    "coverage",
    "DurationEquivalence",
    "duration_for_damage",
    "time_compression",
    "sine_equivalent_of_shock",
    "random_covers_shock",
    "psd_for_ers",
]


def _same_size(field: str, arr: np.ndarray, n: int) -> None:
    if arr.size != n:
        raise InputError(field, f"{arr.size} values", f"must match fn_hz ({n} values)")


@dataclass(frozen=True)
class EquivalentRandomTest:
    """A random test derived from a target FDS.

    Attributes
    ----------
    fn_hz : numpy.ndarray
        Natural frequencies (also the breakpoints of `asd_g2_hz`). [Hz]
    target_fds : numpy.ndarray
        Life FDS times the margin factor. [g^b]
    duration_s : float
        Test duration. [s]
    q, b : float
        FDS parameters. [unitless]
    asd_g2_hz : numpy.ndarray
        Equivalent PSD at fn (exact-FDS iteration). [g^2/Hz]
    achieved_fds : numpy.ndarray
        Exact narrow-band FDS of that PSD over `duration_s`. [g^b]
    max_error : float
        max |achieved / target - 1|. [unitless]
    simplified_freq_hz, simplified_asd_g2_hz : numpy.ndarray or None
        Conservative breakpoint simplification (None when not asked). [Hz], [g^2/Hz]
    simplified_fds_margin_db : float or None
        min over fn of 10 log10(FDS(simplified) / target): >= 0 when the
        simplified test still covers the target. [dB]
    freq_hz, breakpoints_asd_g2_hz : numpy.ndarray or None
        Breakpoints of the test PSD: fn and `asd_g2_hz`, with the band's edges when
        `band_hz` was given (:func:`qualplan.dynamics.fatigue.edge_breakpoints`).
        [Hz], [g^2/Hz]
    """

    fn_hz: np.ndarray
    target_fds: np.ndarray
    duration_s: float
    q: float
    b: float
    asd_g2_hz: np.ndarray
    achieved_fds: np.ndarray
    max_error: float
    simplified_freq_hz: np.ndarray | None = None
    simplified_asd_g2_hz: np.ndarray | None = None
    simplified_fds_margin_db: float | None = None
    freq_hz: np.ndarray | None = None
    breakpoints_asd_g2_hz: np.ndarray | None = None


def random_test_for_fds(fn_hz, life_fds, test_duration_s: float, q: float, b: float, *,
                        margin_factor: float = 1.0, max_points: int | None = None,
                        rtol: float = 1e-3, band_hz=None) -> EquivalentRandomTest:
    """Random test PSD that produces a life cycle's FDS (times a margin) in a test duration.

    Parameters
    ----------
    fn_hz : array_like
        Natural frequencies of the FDS, strictly increasing. [Hz]
    life_fds : array_like
        Life-cycle FDS (e.g. :func:`qualplan.dynamics.fatigue.life_cycle_fds`). [g^b]
    test_duration_s : float
        Test duration. [s]
    q, b : float
        Q and Basquin exponent used for `life_fds`. [unitless]
    margin_factor : float
        Factor on damage (default 1; e.g. 2 for a damage margin of 3 dB). [unitless]
    max_points : int, optional
        If given, also simplify the PSD to at most this many breakpoints with the
        random core's conservative simplification (:func:`qualplan.dynamics.psd.simplify`).
    rtol : float
        Tolerance of the FDS match (default 1e-3; the issue asks 1e-2).
    band_hz : (float, float), optional
        Band the test PSD spans; its values at the first and last fn are held flat out
        to these edges (default: the PSD starts and stops at the first and last fn). [Hz]

    Returns
    -------
    EquivalentRandomTest

    Notes
    -----
    Closed-form narrow-band inversion (Lalanne vol. 5; Henderson & Piersol 1995)

        G(fn) = [D / (fn T Gamma(1 + b/2))]^(2/b) / (pi fn Q),

    then Newton steps on ln G against the exact narrow-band FDS
    (:func:`qualplan.dynamics.fatigue.equivalent_psd`) until the exact FDS
    (:func:`qualplan.dynamics.fatigue.fds_random`) is within `rtol` at every fn.
    """
    m = v.positive_scalar("margin_factor", margin_factor)
    fn = v.as_1d_float("fn_hz", fn_hz, min_size=2)
    target = v.as_1d_float("life_fds", life_fds) * m
    _same_size("life_fds", target, fn.size)
    t = v.positive_scalar("test_duration_s", test_duration_s)
    g = fatigue.equivalent_psd(fn, target, t, q, b, rtol=rtol, band_hz=band_hz)
    bf, ba = fatigue.edge_breakpoints(fn, g, band_hz)
    achieved = fatigue.fds_random(bf, ba, t, fn, q, b)
    err = float(np.max(np.abs(achieved / target - 1.0)))
    sf = sa = margin = None
    if max_points is not None:
        from qualplan.dynamics import psd

        sf, sa = psd.simplify(bf, ba, max_points)
        d_s = fatigue.fds_random(sf, sa, t, fn, q, b)
        margin = float(np.min(10.0 * np.log10(d_s / target)))
    return EquivalentRandomTest(fn, target, t, float(q), float(b), g, achieved, err,
                                sf, sa, margin, bf, ba)


@dataclass(frozen=True)
class Coverage:
    """Coverage of the life environments by a test, per natural frequency.

    Attributes
    ----------
    fn_hz : numpy.ndarray
        Natural frequencies. [Hz]
    fds_ratio_db : numpy.ndarray or None
        10 log10(FDS_test / FDS_life). [dB]
    fds_level_db : numpy.ndarray or None
        Equivalent level margin (20/b) log10(FDS_test / FDS_life). [dB]
    ers_ratio_db : numpy.ndarray or None
        20 log10(ERS_test / ERS_life). [dB]
    fds_required_db, ers_required_db : float
        Required margins. [dB]
    fds_pass, ers_pass : numpy.ndarray of bool or None
        Per fn: ratio >= required.
    passed : bool
        Every asked criterion passes at every fn.
    worst_fds_fn_hz, worst_ers_fn_hz : float or None
        Natural frequency of the smallest margin (ratio - required). [Hz]
    worst_fds_margin_db, worst_ers_margin_db : float or None
        That smallest margin over the requirement. [dB]
    overtest_limit_db : float or None
        Ceiling on the ERS ratio. [dB]
    overtest : numpy.ndarray of bool or None
        Per fn: ERS ratio above the ceiling (test much harsher than life).
    max_overtest_db, max_overtest_fn_hz : float or None
        Largest ERS ratio and where. [dB], [Hz]
    """

    fn_hz: np.ndarray
    fds_ratio_db: np.ndarray | None
    fds_level_db: np.ndarray | None
    ers_ratio_db: np.ndarray | None
    fds_required_db: float
    ers_required_db: float
    fds_pass: np.ndarray | None
    ers_pass: np.ndarray | None
    passed: bool
    worst_fds_fn_hz: float | None
    worst_fds_margin_db: float | None
    worst_ers_fn_hz: float | None
    worst_ers_margin_db: float | None
    overtest_limit_db: float | None
    overtest: np.ndarray | None
    max_overtest_db: float | None
    max_overtest_fn_hz: float | None


def _ratio_db(field: str, test, life, n: int, factor: float) -> np.ndarray:
    a = v.as_1d_float(f"test_{field}", test)
    c = v.as_1d_float(f"life_{field}", life)
    _same_size(f"test_{field}", a, n)
    _same_size(f"life_{field}", c, n)
    v.all_positive(f"test_{field}", a)
    v.all_positive(f"life_{field}", c)
    return factor * np.log10(a / c)


def coverage(fn_hz, *, test_fds=None, life_fds=None, test_ers=None, life_ers=None,
             b: float | None = None, fds_margin_db: float = 0.0, ers_margin_db: float = 0.0,
             overtest_db: float | None = None) -> Coverage:
    """Does a test cover the life environments (FDS and/or ERS), and does it over-test?

    Parameters
    ----------
    fn_hz : array_like
        Natural frequencies common to all spectra. [Hz]
    test_fds, life_fds : array_like, optional
        FDS of the test and of the life cycle (same Q and b). [g^b]
    test_ers, life_ers : array_like, optional
        ERS of the test and envelope ERS of the life environments (max over
        environments, same Q). [g]
    b : float, optional
        Basquin exponent of the FDS, for the equivalent level margin. [unitless]
    fds_margin_db : float
        Required 10 log10(FDS_test / FDS_life) (default 0). [dB]
    ers_margin_db : float
        Required 20 log10(ERS_test / ERS_life) (default 0). [dB]
    overtest_db : float, optional
        Ceiling on the ERS ratio; above it the test is flagged as an
        over-test (e.g. 6 dB). [dB]

    Returns
    -------
    Coverage
        Ratios, pass/fail per fn, the worst frequency and the over-test flags.

    Notes
    -----
    Criterion of specification by equivalence (Lalanne vol. 5): ERS_test >= ERS_life
    and FDS_test >= FDS_life at every fn (with margins); over-test checked against a
    ceiling on the ERS ratio.
    """
    fn = v.as_1d_float("fn_hz", fn_hz)
    if (test_fds is None) != (life_fds is None):
        raise InputError("test_fds", "one of test_fds/life_fds", "give both or neither")
    if (test_ers is None) != (life_ers is None):
        raise InputError("test_ers", "one of test_ers/life_ers", "give both or neither")
    if test_fds is None and test_ers is None:
        raise InputError("test_fds", None, "give FDS and/or ERS pairs to compare")
    fds_db = lvl_db = fds_ok = ers_db = ers_ok = over = None
    wf = wfm = we = wem = mo = mof = None
    passed = True
    if test_fds is not None:
        fds_db = _ratio_db("fds", test_fds, life_fds, fn.size, 10.0)
        if b is not None:
            lvl_db = fds_db * 2.0 / v.positive_scalar("b", b)
        margin = fds_db - float(fds_margin_db)
        fds_ok = margin >= 0.0
        i = int(np.argmin(margin))
        wf, wfm = float(fn[i]), float(margin[i])
        passed &= bool(fds_ok.all())
    if test_ers is not None:
        ers_db = _ratio_db("ers", test_ers, life_ers, fn.size, 20.0)
        margin = ers_db - float(ers_margin_db)
        ers_ok = margin >= 0.0
        i = int(np.argmin(margin))
        we, wem = float(fn[i]), float(margin[i])
        passed &= bool(ers_ok.all())
        j = int(np.argmax(ers_db))
        mo, mof = float(ers_db[j]), float(fn[j])
        if overtest_db is not None:
            over = ers_db > float(overtest_db)
    return Coverage(fn, fds_db, lvl_db, ers_db, float(fds_margin_db), float(ers_margin_db),
                    fds_ok, ers_ok, bool(passed), wf, wfm, we, wem,
                    None if overtest_db is None else float(overtest_db), over, mo, mof)


@dataclass(frozen=True)
class DurationEquivalence:
    """Test duration that reaches the life's damage.

    Attributes
    ----------
    fn_hz : numpy.ndarray
        Natural frequencies. [Hz]
    duration_s : numpy.ndarray
        Per fn: life damage / test damage rate. [s]
    required_duration_s : float
        max over fn: the shortest test that covers every fn. [s]
    governing_fn_hz : float
        Where that maximum occurs. [Hz]
    """

    fn_hz: np.ndarray
    duration_s: np.ndarray
    required_duration_s: float
    governing_fn_hz: float


def duration_for_damage(fn_hz, test_fds_per_s, life_fds, *,
                        margin_factor: float = 1.0) -> DurationEquivalence:
    """Duration of a test at a given level that reaches the life's damage at every fn.

    Parameters
    ----------
    fn_hz : array_like
        Natural frequencies. [Hz]
    test_fds_per_s : array_like
        FDS of one second of the test level (e.g. ``fds_random(..., 1.0, ...)``). [g^b/s]
    life_fds : array_like
        Life-cycle FDS. [g^b]
    margin_factor : float
        Factor on the life damage (default 1). [unitless]

    Returns
    -------
    DurationEquivalence
        T(fn) = margin x D_life(fn) / d_test(fn); the test must last max T.

    Notes
    -----
    Time compression through the FDS: damage is linear in time for a
    stationary test (Miner), so the duration follows per fn; under the
    narrow-band model this is MIL-STD-810H's t2/t1 = (S1/S2)^m with m = b.
    """
    fn = v.as_1d_float("fn_hz", fn_hz)
    rate = v.as_1d_float("test_fds_per_s", test_fds_per_s)
    life = v.as_1d_float("life_fds", life_fds)
    _same_size("test_fds_per_s", rate, fn.size)
    _same_size("life_fds", life, fn.size)
    v.all_positive("test_fds_per_s", rate)
    if (life < 0).any():
        raise InputError("life_fds", life, "must be >= 0")
    t = v.positive_scalar("margin_factor", margin_factor) * life / rate
    i = int(np.argmax(t))
    return DurationEquivalence(fn, t, float(t[i]), float(fn[i]))


def time_compression(service_duration_s: float, test_duration_s: float, m: float) -> float:
    """Severity factor of a time-compressed test (MIL-STD-810H Method 514.8 Annex A).

    Parameters
    ----------
    service_duration_s : float
        In-service exposure t2. [s]
    test_duration_s : float
        Test duration t1. [s]
    m : float
        Exponent (based on the S-N slope; 810H: typically 7.5 random, 6 sine). [unitless]

    Returns
    -------
    float
        S_test / S_service = (t2 / t1)^(1/m) on g rms or sine amplitude; square it
        for a PSD ratio. [unitless]
    """
    t2 = v.positive_scalar("service_duration_s", service_duration_s)
    t1 = v.positive_scalar("test_duration_s", test_duration_s)
    return (t2 / t1) ** (1.0 / v.positive_scalar("m", m))


def sine_equivalent_of_shock(srs_g, q: float) -> np.ndarray:
    """Sine amplitude equivalent to a low-frequency transient: SRS / Q.

    Parameters
    ----------
    srs_g : array_like
        Maximax SRS of the transient at the natural frequencies. [g]
    q : float
        Q of that SRS. [unitless]

    Returns
    -------
    numpy.ndarray
        Peak sine input that gives the same peak response at resonance
        (steady state), fn by fn. [g]

    Notes
    -----
    Common practice in launch-vehicle coupled-loads work (equivalent sine input
    of a transient). It matches the peak response only; a sine sweep at that level
    usually applies many more cycles than the transient (check the FDS).
    """
    s = v.as_1d_float("srs_g", srs_g)
    if (s < 0).any():
        raise InputError("srs_g", s, "must be >= 0")
    return s / v.check_q(q)


def random_covers_shock(freq_hz, asd_g2_hz, duration_s: float, fn_hz, q: float, shock_srs_g,
                        *, margin_db: float = 0.0, overtest_db: float | None = None) -> Coverage:
    """Does a random test cover a shock in peak response (ERS random vs SRS)?

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Random test PSD. [Hz], [g^2/Hz]
    duration_s : float
        Random test duration. [s]
    fn_hz : array_like
        Natural frequencies of the SRS. [Hz]
    q : float
        Q of the SRS. [unitless]
    shock_srs_g : array_like
        Maximax SRS of the shock, pseudo-acceleration preferred
        (:func:`qualplan.dynamics.extreme.ers_shock`). [g]
    margin_db : float
        Required 20 log10(ERS_random / SRS). [dB]
    overtest_db : float, optional
        Ceiling on that ratio. [dB]

    Returns
    -------
    Coverage
        ERS part only; the ERS of the random test is the Davenport expected
        largest absolute peak (two-sided) over the duration.

    Notes
    -----
    The comparison is of peak responses only. A random test covering a shock's
    SRS does not reproduce its waveform (velocity change, duration); for
    fragile, non-linear or preloaded parts, test the shock itself.
    """
    ers = extreme.ers_random(freq_hz, asd_g2_hz, duration_s, fn_hz, q, two_sided=True)
    return coverage(fn_hz, test_ers=ers, life_ers=shock_srs_g, ers_margin_db=margin_db,
                    overtest_db=overtest_db)


def psd_for_ers(fn_hz, ers_g, duration_s: float, q: float, *, method: str = "u0") -> np.ndarray:
    """PSD level at fn whose random ERS (Miles rms, n0+ = fn) equals a target ERS.

    Parameters
    ----------
    fn_hz : array_like
        Natural frequencies. [Hz]
    ers_g : array_like
        Target ERS (e.g. Q x a of a sine, or an SRS). [g]
    duration_s : float
        Random test duration. [s]
    q : float
        Amplification factor. [unitless]
    method : {"u0", "davenport"}
        Peak factor (see :func:`qualplan.dynamics.extreme.peak_factor`).

    Returns
    -------
    numpy.ndarray
        G(fn) = (ERS / u)^2 / ((pi/2) fn Q). [g^2/Hz]
    """
    fn = v.as_1d_float("fn_hz", fn_hz)
    v.all_positive("fn_hz", fn)
    e = v.as_1d_float("ers_g", ers_g)
    _same_size("ers_g", e, fn.size)
    t = v.positive_scalar("duration_s", duration_s)
    qq = v.check_q(q)
    u = extreme.peak_factor(fn * t, method=method)
    return (e / u) ** 2 / (0.5 * math.pi * fn * qq)
