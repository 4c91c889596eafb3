"""Helpers of the bad-input corpus: a fingerprint of the whole database (row count and a
content hash per table) and small bad files made in memory."""

from __future__ import annotations

import hashlib
import io
import struct

import numpy as np
from sqlalchemy import select

from qualplan.store.base import Base


def db_state(factory) -> dict[str, tuple[int, str]]:
    """(row count, SHA-256 of every row in primary-key order) of each table."""
    out = {}
    with factory() as session:
        for table in Base.metadata.sorted_tables:
            order = list(table.primary_key.columns) or list(table.columns)
            rows = session.execute(select(table).order_by(*order)).all()
            digest = hashlib.sha256()
            for row in rows:
                digest.update(repr(tuple(row)).encode())
                digest.update(b"\n")
            out[table.name] = (len(rows), digest.hexdigest())
    return out


def changed(before: dict, after: dict) -> dict:
    return {k: (before.get(k), after.get(k)) for k in after if before.get(k) != after[k]}


def wav_bytes(fs: int = 1000, n: int = 64, *, truncate: int = 0) -> bytes:
    """A 16-bit mono PCM WAV (Microsoft RIFF WAVE layout); `truncate` bytes cut off the end."""
    data = struct.pack(f"<{n}h", *(int(1000 * np.sin(0.3 * i)) for i in range(n)))
    fmt = struct.pack("<HHIIHH", 1, 1, fs, fs * 2, 2, 16)
    raw = (b"RIFF" + struct.pack("<I", 36 + len(data)) + b"WAVE" + b"fmt " +
           struct.pack("<I", 16) + fmt + b"data" + struct.pack("<I", len(data)) + data)
    return raw[:len(raw) - truncate] if truncate else raw


def npz_bytes() -> bytes:
    buf = io.BytesIO()
    np.savez(buf, x=np.arange(16.0))
    return buf.getvalue()


def npy_bytes(values) -> bytes:
    buf = io.BytesIO()
    np.save(buf, np.asarray(values))
    return buf.getvalue()
