"""Canonical content hashes (SHA-256, hex) of revisions and level inputs."""

from __future__ import annotations

import hashlib
import json
from typing import Any

import numpy as np


def canonical_json(value: Any) -> bytes:
    """JSON with sorted keys and no whitespace; floats in repr form (round-trip exact)."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), allow_nan=False).encode()


def revision_hash(spec: dict[str, Any], data: np.ndarray | None) -> str:
    """Hash of a revision's spec and array data (little-endian float64 bytes + shape)."""
    h = hashlib.sha256()
    h.update(b"spec:")
    h.update(canonical_json(spec))
    if data is not None:
        arr = np.ascontiguousarray(np.asarray(data, dtype="<f8"))
        h.update(b"data:")
        h.update(canonical_json(list(arr.shape)))
        h.update(arr.tobytes())
    return h.hexdigest()


def json_hash(value: Any) -> str:
    """Hash of any JSON-serialisable value in canonical form."""
    return hashlib.sha256(canonical_json(value)).hexdigest()
