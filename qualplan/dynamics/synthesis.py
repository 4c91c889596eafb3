"""Time histories synthesised from spectra.

- :func:`gaussian_from_psd`: a stationary random acceleration record whose PSD
  is a given breakpoint profile (random-phase inverse FFT).

See docs/methods/signal.md, "Synthesis".
"""

from __future__ import annotations

import math

import numpy as np

from qualplan.dynamics import _loglog
from qualplan.dynamics._validate import positive_scalar
from qualplan.dynamics.errors import InputError

__all__ = ["gaussian_from_psd"]


def gaussian_from_psd(freq_hz, asd_g2_hz, duration_s: float, fs_hz: float, *,
                      rng: np.random.Generator, random_amplitude: bool = False) -> np.ndarray:
    """Stationary random acceleration record with a given PSD.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        PSD breakpoints [Hz], [g^2/Hz] (one-sided), log-log interpolated.
    duration_s : float
        Record length [s]; the record has ``N = round(duration_s * fs_hz)`` samples.
    fs_hz : float
        Sample rate [Hz]; must exceed twice the highest breakpoint frequency.
    rng : numpy.random.Generator
        Source of the random phases (pass ``np.random.default_rng(seed)``).
    random_amplitude : bool
        False (default): random phases, fixed line amplitudes; the record's rms equals
        the PSD's on the FFT grid exactly. True: complex normal line coefficients
        (Rayleigh amplitudes): a sample of a stationary Gaussian process, whose
        estimated PSD scatters as Gaussian-noise theory predicts (chi-square, random
        error 1/sqrt(n_d)) and whose rms varies from record to record.

    Returns
    -------
    ndarray
        Acceleration [g], length N, zero mean.

    Notes
    -----
    Random-phase inverse FFT: on the FFT lines ``f_k = k fs/N`` (``df = fs/N``),
    ``x(t) = sum_k sqrt(2 G(f_k) df) cos(2 pi f_k t + phi_k)``, phases
    ``phi_k ~ U(0, 2 pi)``. The mean square of the record is exactly
    ``sum_k G(f_k) df``, the rectangle-rule area of the profile on the FFT grid
    (within ``O(df/f_min)`` of the exact area). The record is periodic with
    period ``duration_s``; its amplitude distribution is Gaussian to a close
    approximation (sum of many independent cosines, central limit theorem). With
    fixed line amplitudes the PSD estimated from it scatters far less than that of
    Gaussian noise (every FFT line has exactly its mean power); use
    ``random_amplitude=True`` to test estimators' statistics.

    References
    ----------
    Shinozuka, M. & Jan, C.-M., "Digital simulation of random processes and its
    applications", J. Sound Vib. 25(1), 1972 (spectral representation).
    """
    fp, ap = _loglog.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")
    duration = positive_scalar("duration_s", duration_s)
    fs = positive_scalar("fs_hz", fs_hz)
    if not isinstance(rng, np.random.Generator):
        raise InputError("rng", type(rng).__name__, "must be a numpy.random.Generator")
    if fs <= 2.0 * fp[-1]:
        raise InputError(
            "fs_hz", fs, f"must exceed twice the highest PSD frequency ({2 * fp[-1]:g} Hz)"
        )
    n = int(round(duration * fs))
    if n < 2:
        raise InputError("duration_s", duration_s, f"gives {n} samples at {fs:g} Hz (needs >= 2)")
    df = fs / n
    nf = n // 2 + 1
    f = np.arange(nf) * df
    g = _loglog._interp(fp, ap, f)
    if n % 2 == 0:
        g[-1] = 0.0  # the Nyquist line has no phase freedom; PSD is below fs/2 anyway
    amp = np.sqrt(2.0 * g * df)  # cosine amplitude per line [g]
    if random_amplitude:
        # E|c|^2 = 1 with c = (a + ib)/sqrt(2), a, b ~ N(0, 1): same mean power per line
        c = (rng.standard_normal(nf) + 1j * rng.standard_normal(nf)) / math.sqrt(2.0)
    else:
        c = np.exp(1j * rng.uniform(0.0, 2.0 * math.pi, size=nf))
    spec = (0.5 * n) * amp * c
    spec[0] = 0.0
    x = np.fft.irfft(spec, n=n)
    return x
