"""Multi-channel records stored in fixed-size compressed chunks (append-only).

A record belongs to one environment revision (kind ``time_history``). The revision's
``spec["record"]`` holds the sample rate, sample and chunk counts and the channel
statistics; :class:`RecordChannel` rows name the channels (name, axis, unit,
calibration) and :class:`RecordChunk` rows hold the samples: channel ``c``, chunk
``seq`` covers samples ``seq * chunk_samples`` up to the next chunk, as zlib-compressed
little-endian float64 bytes with the SHA-256 of the uncompressed bytes. The revision's
``content_hash`` covers the spec, the channels and every chunk hash in order
(:func:`record_hash`), so a change to any sample changes it.
"""

from __future__ import annotations

import hashlib
import zlib
from collections.abc import Iterable
from typing import Any

import numpy as np
from sqlalchemy import Float, ForeignKey, Integer, LargeBinary, String, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column

from qualplan.store.base import Base
from qualplan.store.hashing import canonical_json

#: Samples per chunk and channel unless the importer chooses (2^16: 512 KiB raw).
CHUNK_SAMPLES = 65_536


class RecordChannel(Base):
    """One channel of a chunked record: name, axis, unit of the stored samples, calibration."""

    __tablename__ = "record_channels"
    __table_args__ = (UniqueConstraint("revision_id", "index"),
                      UniqueConstraint("revision_id", "name"))

    id: Mapped[int] = mapped_column(primary_key=True)
    revision_id: Mapped[int] = mapped_column(ForeignKey("environment_revisions.id"), index=True)
    index: Mapped[int] = mapped_column(Integer)
    name: Mapped[str] = mapped_column(String(120))
    #: Axis of the channel (X, Y, Z or a free label such as "-Y" or "rot").
    axis: Mapped[str] = mapped_column(String(20))
    #: Unit of the stored samples (always "g").
    unit: Mapped[str] = mapped_column(String(20))
    #: Unit declared for the file's values.
    source_unit: Mapped[str] = mapped_column(String(40))
    #: Factor applied at import: stored value = file value x calibration x unit factor.
    calibration: Mapped[float] = mapped_column(Float)


class RecordChunk(Base):
    """Samples ``seq * chunk_samples ...`` of one channel, compressed, with their hash."""

    __tablename__ = "record_chunks"
    __table_args__ = (UniqueConstraint("revision_id", "channel_index", "seq"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    revision_id: Mapped[int] = mapped_column(ForeignKey("environment_revisions.id"), index=True)
    channel_index: Mapped[int] = mapped_column(Integer)
    seq: Mapped[int] = mapped_column(Integer)
    n_samples: Mapped[int] = mapped_column(Integer)
    #: SHA-256 (hex) of the uncompressed little-endian float64 bytes.
    sha256: Mapped[str] = mapped_column(String(64))
    data: Mapped[bytes] = mapped_column(LargeBinary)


RECORD_MODELS: tuple[type[Base], ...] = (RecordChannel, RecordChunk)


def pack_chunk(values: np.ndarray) -> tuple[bytes, str]:
    """Compressed bytes and SHA-256 of a chunk of samples (little-endian float64)."""
    raw = np.ascontiguousarray(values, dtype="<f8").tobytes()
    return zlib.compress(raw, level=1), hashlib.sha256(raw).hexdigest()


def unpack_chunk(blob: bytes, sha256: str | None = None) -> np.ndarray:
    """Samples of a chunk; with `sha256`, refuse bytes that do not match it."""
    raw = zlib.decompress(bytes(blob))
    if sha256 is not None and hashlib.sha256(raw).hexdigest() != sha256:
        raise ValueError("record chunk does not match its hash: the stored data are damaged")
    return np.frombuffer(raw, dtype="<f8").astype(float)


def record_hash(spec: dict[str, Any], channels: list[dict[str, Any]],
                chunk_hashes: Iterable[str]) -> str:
    """SHA-256 of a record revision: spec, channels, then each chunk hash in order."""
    h = hashlib.sha256()
    h.update(b"spec:")
    h.update(canonical_json(spec))
    h.update(b"channels:")
    h.update(canonical_json(channels))
    h.update(b"chunks:")
    for c in chunk_hashes:
        h.update(c.encode())
    return h.hexdigest()
