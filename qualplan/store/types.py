"""Column types: UTC datetimes and compact numpy array blobs."""

from __future__ import annotations

import io
import zlib
from datetime import UTC, datetime

import numpy as np
from sqlalchemy import DateTime, LargeBinary
from sqlalchemy.types import TypeDecorator


class UtcDateTime(TypeDecorator):
    """Timezone-aware UTC datetime on every backend (SQLite keeps naive text)."""

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError(f"naive datetime {value!r}: give a timezone-aware UTC datetime")
        return value.astimezone(UTC)

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=UTC)
        return value.astimezone(UTC)


def utcnow() -> datetime:
    return datetime.now(UTC)


def pack_array(arr: np.ndarray) -> bytes:
    """Serialise an array as zlib-compressed .npy bytes (dtype and shape kept)."""
    buf = io.BytesIO()
    np.save(buf, np.ascontiguousarray(arr), allow_pickle=False)
    return zlib.compress(buf.getvalue(), level=6)


def unpack_array(blob: bytes) -> np.ndarray:
    """Inverse of :func:`pack_array`."""
    return np.load(io.BytesIO(zlib.decompress(blob)), allow_pickle=False)


class ArrayBlob(TypeDecorator):
    """A numpy array stored as a compressed .npy blob (not a JSON list of floats)."""

    impl = LargeBinary
    cache_ok = True

    def process_bind_param(self, value, dialect):
        if value is None:
            return None
        return pack_array(np.asarray(value))

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        return unpack_array(bytes(value))
