"""Time compression of vibration exposure (inverse power law).

MIL-STD-810H Method 514.8 Annex A: ``t2/t1 = (S1/S2)^m`` with t1 the equivalent
test time, t2 the in-service time, S1 the test severity (g rms for random, peak g
for sine), S2 the in-service severity and m an exponent "based on (but not equal
to)" the S-N slope; typical m = 7.5 for random and m = 6 for sine. In PSD terms
``W_test / W_service = (t_service / t_test)^(2/m)``.

The standard cautions against compressing so far that the test level exceeds the
maximum service level or drives the item into non-linear behaviour; it fixes no
cap. :func:`level_for_duration` can check a ceiling you give it.

See docs/methods/psd.md, "Time compression".
"""

from __future__ import annotations

import math

import numpy as np

from qualplan.dynamics import _loglog
from qualplan.dynamics._validate import positive_scalar
from qualplan.dynamics.errors import InputError

__all__ = [
    "M_RANDOM",
    "M_SINE",
    "severity_ratio",
    "level_for_duration",
    "duration_for_level",
]

#: MIL-STD-810H Method 514.8 Annex A typical exponent for random vibration (g rms).
M_RANDOM = 7.5
#: MIL-STD-810H Method 514.8 Annex A typical exponent for sine (peak g).
M_SINE = 6.0


def severity_ratio(t_service_s: float, t_test_s: float, *, m: float = M_RANDOM) -> float:
    """Severity factor S_test / S_service for a shorter (or longer) test.

    Parameters
    ----------
    t_service_s : float
        In-service exposure duration [s].
    t_test_s : float
        Test duration [s].
    m : float
        Exponent of the inverse power law [unitless]; 7.5 for random (g rms),
        6 for sine (peak), per MIL-STD-810H Method 514.8 Annex A.

    Returns
    -------
    float
        ``(t_service / t_test)^(1/m)`` [unitless], applied to g rms or peak g
        (its square applies to a PSD).

    Examples
    --------
    1000 h in service compressed into 10 h, m = 7.5: g rms x1.8478.

    >>> round(severity_ratio(1000 * 3600, 10 * 3600), 4)
    1.8478

    References
    ----------
    MIL-STD-810H (2019), Method 514.8, Annex A (time compression, inverse power law).
    """
    ts = positive_scalar("t_service_s", t_service_s)
    tt = positive_scalar("t_test_s", t_test_s)
    mm = positive_scalar("m", m)
    return (ts / tt) ** (1.0 / mm)


def level_for_duration(freq_hz, asd_g2_hz, t_service_s: float, t_test_s: float, *,
                       m: float = M_RANDOM, max_grms: float | None = None):
    """PSD for a test of duration `t_test_s` equivalent to the service PSD over `t_service_s`.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Service PSD breakpoints [Hz], [g^2/Hz].
    t_service_s, t_test_s : float
        Service and test durations [s].
    m : float
        Exponent on g rms [unitless] (MIL-STD-810H default 7.5 for random).
    max_grms : float, optional
        Ceiling on the test g rms [g] (e.g. the maximum service level); a compressed
        level above it raises InputError, since MIL-STD-810H advises against
        compressing beyond the maximum service level.

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray
        Same shape, ASD x ``(t_service/t_test)^(2/m)``.

    References
    ----------
    MIL-STD-810H (2019), Method 514.8, Annex A.
    """
    f, a = _loglog.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")
    r = severity_ratio(t_service_s, t_test_s, m=m)
    out = a * r * r
    if max_grms is not None:
        cap = positive_scalar("max_grms", max_grms)
        g = math.sqrt(float(np.sum(_loglog._segment_integrals(f, out))))
        if g > cap:
            raise InputError(
                "t_test_s", t_test_s,
                f"compresses to {g:.4g} g rms, above max_grms={cap:g} g rms; "
                "use a longer test (MIL-STD-810H 514.8 Annex A caution)",
            )
    return f, out


def duration_for_level(t_service_s: float, grms_service: float, grms_test: float, *,
                       m: float = M_RANDOM) -> float:
    """Test duration at a higher level equivalent to a service exposure.

    Parameters
    ----------
    t_service_s : float
        Service duration [s].
    grms_service, grms_test : float
        Service and test severity [g rms] (or peak g for sine with m = 6).
    m : float
        Exponent [unitless], default 7.5 (random).

    Returns
    -------
    float
        ``t_test = t_service (S_service / S_test)^m`` [s].

    References
    ----------
    MIL-STD-810H (2019), Method 514.8, Annex A.
    """
    ts = positive_scalar("t_service_s", t_service_s)
    s2 = positive_scalar("grms_service", grms_service)
    s1 = positive_scalar("grms_test", grms_test)
    mm = positive_scalar("m", m)
    return ts * (s2 / s1) ** mm
