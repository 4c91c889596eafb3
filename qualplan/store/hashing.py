"""Canonical content hashes (SHA-256, hex) of revisions, level inputs and document rows."""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from datetime import UTC, datetime
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


#: The columns of a document row its ``row_hash`` covers (every column but id and the hash).
DOCUMENT_ROW_FIELDS = ("program_id", "product_id", "kind", "number", "revision", "title",
                       "content_hash", "input_hashes", "note", "author", "created_at")


def _utc_text(value: Any) -> Any:
    """A datetime as ISO 8601 text in UTC (naive values are UTC, as SQLite keeps them)."""
    if isinstance(value, datetime):
        if value.tzinfo is None:
            value = value.replace(tzinfo=UTC)
        return value.astimezone(UTC).isoformat()
    return value


def document_row_hash(row: Mapping[str, Any]) -> str:
    """SHA-256 of an issued document's row: every column but ``id`` and the hash itself.

    Enum values count by their text, datetimes as UTC ISO 8601 text. A change to any
    column (a product put on a program-wide audit, an edited note) changes the hash.
    """
    body = {}
    for name in DOCUMENT_ROW_FIELDS:
        value = row[name]
        body[name] = _utc_text(getattr(value, "value", value))
    return json_hash(body)
