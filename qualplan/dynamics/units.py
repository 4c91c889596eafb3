"""Units and physical constants used across qualplan.

Inside the core: acceleration in g, PSD in g^2/Hz, frequency in Hz, time in s,
displacement in m, velocity in m/s. Conversions happen at the edges.
"""

from __future__ import annotations

import math

#: Standard gravity [m/s^2] (CGPM 1901; ISO 80000-3).
G0_M_S2 = 9.80665
#: Standard gravity [in/s^2] (9.80665 / 0.0254).
G0_IN_S2 = G0_M_S2 / 0.0254
#: Metres per inch (exact, international inch 1959).
M_PER_IN = 0.0254
#: dB per octave for a log-log exponent of 1 in power: 10*log10(2) [dB/oct].
#: qualplan uses the exact value (not 3.0), see docs/methods/psd.md.
DB_PER_OCT_UNIT = 10.0 * math.log10(2.0)


def db_power(ratio: float) -> float:
    """Ratio of two powers (PSD values) in dB: 10*log10(ratio) [dB]."""
    return 10.0 * math.log10(ratio)


def db_amplitude(ratio: float) -> float:
    """Ratio of two amplitudes (g rms, g peak, SRS) in dB: 20*log10(ratio) [dB]."""
    return 20.0 * math.log10(ratio)


def from_db_power(db: float) -> float:
    """Power ratio for a level in dB: 10^(dB/10) [unitless]."""
    return 10.0 ** (db / 10.0)


def from_db_amplitude(db: float) -> float:
    """Amplitude ratio for a level in dB: 10^(dB/20) [unitless]."""
    return 10.0 ** (db / 20.0)
