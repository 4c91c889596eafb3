"""Shared input checks of the numeric core (one rule, one message)."""

from __future__ import annotations

import numpy as np

from qualplan.dynamics.errors import InputError


def as_1d_float(field: str, values, *, min_size: int = 1) -> np.ndarray:
    """Return `values` as a finite 1-D float64 array or raise InputError."""
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(field, values, "must be numbers") from exc
    if arr.ndim == 0:
        arr = arr.reshape(1)
    if arr.ndim != 1:
        raise InputError(field, f"shape {arr.shape}", "must be one-dimensional")
    if arr.size < min_size:
        raise InputError(field, f"{arr.size} values", f"needs at least {min_size}")
    if not np.isfinite(arr).all():  # one pass; where, only when something is wrong
        bad = ~np.isfinite(arr)
        i = int(np.argmax(bad))
        raise InputError(f"{field}[{i}]", float(arr[i]), "must be finite (no NaN or inf)")
    return arr


def strictly_increasing(field: str, arr: np.ndarray) -> None:
    """Raise InputError unless `arr` is strictly increasing."""
    d = np.diff(arr)
    if (d <= 0).any():
        i = int(np.argmax(d <= 0))
        raise InputError(
            f"{field}[{i + 1}]", float(arr[i + 1]),
            f"must be strictly increasing (previous value {arr[i]:g})",
        )


def all_positive(field: str, arr: np.ndarray) -> None:
    """Raise InputError unless every element of `arr` is > 0."""
    bad = arr <= 0
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(f"{field}[{i}]", float(arr[i]), "must be > 0")


def positive_scalar(field: str, value) -> float:
    """Return `value` as a finite float > 0 or raise InputError."""
    try:
        v = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(field, value, "must be a number") from exc
    if not np.isfinite(v) or v <= 0:
        raise InputError(field, value, "must be a finite number > 0")
    return v


def check_q(q) -> float:
    """Return Q as float; Q must exceed 0.5 (underdamped oscillator, zeta < 1)."""
    try:
        v = float(q)
    except (TypeError, ValueError) as exc:
        raise InputError("q", q, "must be a number") from exc
    if not np.isfinite(v) or v <= 0.5:
        raise InputError("q", q, "must be > 0.5 (damping ratio zeta = 1/(2Q) < 1)")
    return v
