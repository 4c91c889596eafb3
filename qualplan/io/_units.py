"""Declared units of files and their factors to the core's units (g, g^2/Hz).

Units are always declared by the caller; nothing here guesses from the data.
"""

from __future__ import annotations

from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2, M_PER_IN

#: The one table of accepted acceleration units, as people write them -> factor to g.
#: It serves the record readers here and planning's breakpoint importers.
ACCEL_UNITS: dict[str, float] = {
    "g": 1.0,
    "mg": 1e-3,
    "m/s^2": 1.0 / G0_M_S2,
    "mm/s^2": 1e-3 / G0_M_S2,
    "in/s^2": M_PER_IN / G0_M_S2,
    "ft/s^2": 12.0 * M_PER_IN / G0_M_S2,
}

#: The one table of accepted acceleration spectral density units -> factor to g^2/Hz.
ASD_UNITS: dict[str, float] = {
    "g^2/Hz": 1.0,
    "(m/s^2)^2/Hz": 1.0 / G0_M_S2 ** 2,
    "(in/s^2)^2/Hz": (M_PER_IN / G0_M_S2) ** 2,
}

#: Every accepted spelling (normalised) of an acceleration unit -> factor to g.
ACCEL_TO_G: dict[str, float] = {
    **{k: v for k, v in ACCEL_UNITS.items()},
    **{k.replace("^2", "2"): v for k, v in ACCEL_UNITS.items()},
}

#: Every accepted spelling (normalised, lower case) of an ASD unit -> factor to g^2/Hz.
ASD_TO_G2_HZ: dict[str, float] = {
    **{k.lower(): v for k, v in ASD_UNITS.items()},
    **{k.lower().replace("^2", "2", 1): v for k, v in ASD_UNITS.items()},
    "m^2/s^4/hz": 1.0 / G0_M_S2 ** 2,
}


def _norm(unit: str) -> str:
    return unit.strip().replace(" ", "").replace("²", "^2").replace("**", "^")


def accel_factor(unit) -> float:
    """Factor from a declared acceleration unit to g [g per unit]."""
    if not isinstance(unit, str) or _norm(unit) not in ACCEL_TO_G:
        raise InputError("unit", unit, f"must be declared, one of {sorted(ACCEL_TO_G)}")
    return ACCEL_TO_G[_norm(unit)]


def asd_factor(unit) -> float:
    """Factor from a declared ASD unit to g^2/Hz [g^2/Hz per unit]."""
    key = _norm(unit).lower() if isinstance(unit, str) else None
    if key not in ASD_TO_G2_HZ:
        raise InputError("unit", unit, f"must be declared, one of {sorted(ASD_TO_G2_HZ)}")
    return ASD_TO_G2_HZ[key]


def recognised_accel(label: str) -> str | None:
    """The normalised acceleration unit named by a file's label, if it is one we know."""
    key = _norm(label) if isinstance(label, str) else ""
    return key if key in ACCEL_TO_G else None
