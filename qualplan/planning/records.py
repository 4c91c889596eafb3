"""Long multi-channel records: import in chunks, read back in chunks, analyse by streaming.

A record is the revision of a ``time_history`` environment whose samples live in
fixed-size compressed chunks (:mod:`qualplan.store.records`), never in one array. The
import reads the file twice through :mod:`qualplan.io.streams`: a first pass computes
every chunk's hash and each channel's statistics (so the immutable revision row is
written once, complete), a second pass compresses and stores the chunks in batches.
Memory is a few chunks whatever the record length.
"""

from __future__ import annotations

import hashlib
import math
import os
import re
import shutil
import tempfile
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, BinaryIO

import numpy as np
from pydantic import BaseModel, Field
from sqlalchemy import insert, select
from sqlalchemy.orm import Session

from qualplan.dynamics import streaming
from qualplan.io.streams import RecordSource, open_record
from qualplan.planning.access import Actor, record, require_for
from qualplan.planning.catalog import _add_unique, get
from qualplan.planning.envdata import core_errors
from qualplan.planning.errors import Conflict, ValidationFailed, VersionMismatch
from qualplan.store import models as m
from qualplan.store.records import (
    CHUNK_SAMPLES,
    RecordChannel,
    RecordChunk,
    pack_chunk,
    record_hash,
    unpack_chunk,
)
from qualplan.store.repositories import RevisionRepository

#: Chunks written per INSERT (bounded memory: 16 x 512 KiB raw at the default size).
_BATCH = 16

Progress = Callable[[float, str], None]


class RecordImport(BaseModel):
    """What to make of an opened record file."""

    product_id: int | None = None
    name: str | None = Field(default=None, max_length=200)
    phase_id: int | None = None
    #: A new revision of this time-history environment instead of a new environment.
    environment_id: int | None = None
    #: With `environment_id`: the revision the uploader saw as the latest (refused when
    #: another one was added since).
    expected_revision: int | None = None
    #: One axis per channel, in the file's channel order (e.g. ["X", "Y", "Z"]).
    channel_axes: list[str]
    source: str = ""
    provenance: str = ""
    note: str = ""


class ChannelRead(BaseModel):
    index: int
    name: str
    axis: str
    unit: str
    source_unit: str
    calibration: float
    stats: dict[str, Any]


class RecordRead(BaseModel):
    environment_id: int
    revision: int
    revision_id: int
    fs_hz: float
    n_samples: int
    duration_s: float
    chunk_samples: int
    n_chunks: int
    content_hash: str
    channels: list[ChannelRead]


class RecordReading(BaseModel):
    """How to read an uploaded record file (the fields beside the file in the API and web)."""

    #: Unit of the file's values (g, m/s^2, ...).
    unit: str | None = None
    #: Sample rate [Hz] (.npy, .mat, .h5, CSV without a time column).
    fs_hz: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    #: Calibration factor (one for every channel; a .wav file: units per full scale).
    calibration: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    #: Variable of a .mat file.
    variable: str | None = None
    #: Dataset of an HDF5 file.
    dataset: str | None = None


#: File name endings a chunked record may have.
RECORD_EXTENSIONS = (".csv", ".txt", ".npy", ".wav", ".mat", ".h5", ".hdf5", ".uff", ".unv")

#: Bytes copied at a time while an upload is spooled to its temporary file.
_COPY_BYTES = 1 << 20


def record_options(filename: str, how: RecordReading) -> dict[str, Any]:
    """The reader options of :func:`qualplan.io.streams.open_record` for a file name.

    Raises ValidationFailed naming the missing or unknown field.
    """
    ext = Path(filename or "").suffix.lower()
    if ext not in RECORD_EXTENSIONS:
        raise ValidationFailed("file", filename, "a record must be one of "
                               + ", ".join(RECORD_EXTENSIONS))
    if not how.unit:
        raise ValidationFailed("value_units", how.unit,
                               "give the unit of the record's values (g or m/s^2)")
    options: dict[str, Any] = {"unit": how.unit}
    if ext == ".wav":
        options["calibration"] = how.calibration if how.calibration is not None else 1.0
    elif how.calibration is not None:
        options["calibration"] = how.calibration
    if ext in (".csv", ".txt"):
        if how.fs_hz is not None:
            options.update(fs_hz=how.fs_hz, time_column=None)
    elif ext not in (".wav", ".uff", ".unv"):
        if how.fs_hz is None:
            raise ValidationFailed("sample_rate_hz", None, f"is required for a {ext} record")
        options["fs_hz"] = how.fs_hz
    if ext == ".mat":
        if not how.variable:
            raise ValidationFailed("variable", how.variable, "is required for a .mat record")
        options["variable"] = how.variable
    if ext in (".h5", ".hdf5"):
        if not how.dataset:
            raise ValidationFailed("dataset", how.dataset, "is required for an HDF5 record")
        options["dataset"] = how.dataset
    return options


def import_record_upload(session: Session, actor: Actor, cmd: RecordImport, filename: str,
                         stream: BinaryIO, how: RecordReading, *,
                         chunk_samples: int = CHUNK_SAMPLES,
                         progress: Progress | None = None) -> RecordRead:
    """Import an uploaded record (the use case behind the API's and the web's upload).

    The upload is copied 1 MiB at a time to a temporary file named like the upload (the
    readers memory-map .npy and .wav files and read the file twice, see
    :func:`import_record`), then imported in chunks; memory stays a few chunks whatever
    the file's size. The temporary file is removed afterwards.
    """
    _check_import(session, actor, cmd)  # before the upload is copied
    options = record_options(filename, how)
    parse_axes(cmd.channel_axes)
    with tempfile.TemporaryDirectory(prefix="qualplan-record-") as folder:
        # the upload's own name (its characters made safe): the readers name the source
        base = re.sub(r"[^A-Za-z0-9._-]", "_", Path(filename).name)[-120:].lstrip(".")
        path = Path(folder) / (Path(base).stem + Path(filename).suffix.lower())
        with open(path, "wb") as out:
            shutil.copyfileobj(stream, out, _COPY_BYTES)
        src = open_record_file(path, **options)
        if not cmd.source:
            cmd = cmd.model_copy(update={"source": Path(filename).name})
        return import_record(session, actor, cmd, src, chunk_samples=chunk_samples,
                             progress=progress)


def open_record_file(path, **options) -> RecordSource:
    """Open a record file for import (qualplan.io.streams.open_record; errors named)."""
    with core_errors(""):
        return open_record(path, **options)


def refuse_exposure(given: dict[str, Any]) -> None:
    """A long record stored in chunks takes no share, duration or count: the life cycle
    does not count it (docs/methods/exposure.md), so a value given for it is refused
    rather than dropped."""
    for key, value in given.items():
        if value is not None:
            raise ValidationFailed(key, value, "is not taken for a long record stored in "
                                   "chunks (channel axes): the life cycle does not count it")


def parse_axes(text: str | Sequence[str]) -> list[str]:
    """``"X,Y,Z"`` -> ``["X", "Y", "Z"]`` (an axis is 1-20 characters, no comma)."""
    items = [a.strip() for a in text.split(",")] if isinstance(text, str) else list(text)
    for i, a in enumerate(items):
        if not isinstance(a, str) or not a or len(a) > 20:
            raise ValidationFailed(f"channel_axes[{i}]", a, "must be 1 to 20 characters")
    return items


def _env_axis(axes: list[str]) -> m.Axis:
    one = {a.upper() for a in axes}
    if len(one) == 1 and (a := one.pop()) in ("X", "Y", "Z"):
        return m.Axis(a)
    return m.Axis.all


def _stats_dict(st: streaming.RecordStats) -> dict[str, Any]:
    def num(v: float) -> float | None:
        return v if math.isfinite(v) else None

    return {
        "mean": {"value": st.mean_g, "unit": "g"},
        "rms": {"value": st.rms_g, "unit": "g rms"},
        "std": {"value": st.std_g, "unit": "g"},
        "min": {"value": st.min_g, "unit": "g"},
        "max": {"value": st.max_g, "unit": "g"},
        "peak": {"value": st.peak_g, "unit": "g"},
        "crest_factor": {"value": num(st.crest_factor), "unit": ""},
        "kurtosis": {"value": num(st.kurtosis), "unit": ""},
    }


def _check_import(session: Session, actor: Actor, cmd: RecordImport) -> None:
    """The actor may import into the environment or product of `cmd` (engineer there)."""
    if cmd.environment_id is not None:
        target = get(session, m.Environment, cmd.environment_id, "environment")
    elif cmd.product_id is not None:
        target = get(session, m.Product, cmd.product_id, "product")
    else:
        raise ValidationFailed("name", cmd.name, "a new environment needs product_id and name")
    require_for(session, actor, target, m.Role.engineer, "importing a record")


def import_record(session: Session, actor: Actor, cmd: RecordImport, src: RecordSource, *,
                  chunk_samples: int = CHUNK_SAMPLES,
                  progress: Progress | None = None) -> RecordRead:
    """Store a multi-channel record as a new environment (or a new revision) in chunks.

    Raises ValidationFailed for a channel-axis list that does not match the channels,
    bad samples (NaN, inf: the channel and sample are named) or a bad chunk size, and
    Conflict for a record identical to the latest revision. Nothing is written before
    the whole file has been read once and checked.
    """
    _check_import(session, actor, cmd)
    if not isinstance(chunk_samples, int) or not 256 <= chunk_samples <= 2 ** 22:
        raise ValidationFailed("chunk_samples", chunk_samples, "must be 256 to 4194304")
    axes = parse_axes(cmd.channel_axes)
    if len(axes) != src.n_channels:
        raise ValidationFailed(
            "channel_axes", ",".join(axes),
            f"must give one axis per channel: the file has {src.n_channels} "
            f"({', '.join(src.channel_names)})")
    say = progress or (lambda f, t: None)
    n_ch = src.n_channels

    # pass 1: hashes and statistics
    hashes: list[list[str]] = [[] for _ in range(n_ch)]
    stats = [streaming.StatsStream(src.fs_hz) for _ in range(n_ch)]
    pool = ThreadPoolExecutor(max_workers=max(1, min(n_ch, os.cpu_count() or 1)))

    def check(c: int, block: np.ndarray) -> None:
        col = np.ascontiguousarray(block[:, c])
        hashes[c].append(pack_chunk_hash(col))
        stats[c].update(col)

    with pool, core_errors(""):
        # channels in threads: hashing, numpy and zlib release the GIL
        for k, block in enumerate(src.chunks(chunk_samples)):
            list(pool.map(check, range(n_ch), [block] * n_ch))
            say(0.5 * (k + 1) * chunk_samples / src.n_samples, "checking the record")
    n_chunks = len(hashes[0])
    channels = [
        {"index": c, "name": src.channel_names[c], "axis": axes[c], "unit": "g",
         "source_unit": src.unit, "calibration": src.factors_to_g[c]}
        for c in range(n_ch)
    ]
    chan_stats = [_stats_dict(s.result()) for s in stats]
    spec = {
        "dt_s": 1.0 / src.fs_hz,
        "record": {
            "fs_hz": src.fs_hz, "t0_s": src.t0_s, "n_samples": src.n_samples,
            "n_channels": n_ch, "chunk_samples": chunk_samples, "n_chunks": n_chunks,
            "source": src.source, "format": src.metadata.get("format", ""),
            "stats": chan_stats,
        },
    }
    content_hash = record_hash(spec, channels, (h for hs in hashes for h in hs))

    # the environment and its revision
    if cmd.environment_id is not None:
        env = get(session, m.Environment, cmd.environment_id, "environment")
        if env.kind is not m.EnvironmentKind.time_history:
            raise ValidationFailed("environment_id", cmd.environment_id,
                                   f"is a {env.kind.value} environment, not a time history")
        latest = RevisionRepository(session).latest(env.id)
        if cmd.expected_revision is not None and latest is not None \
                and latest.number != cmd.expected_revision:
            raise VersionMismatch("environment", env.id, cmd.expected_revision, latest.number)
        if latest is not None and latest.content_hash == content_hash:
            raise Conflict(f"the record is identical to revision {latest.number}; "
                           "nothing to revise")
        action = "revise"
    else:
        if cmd.product_id is None or not cmd.name:
            raise ValidationFailed("name", cmd.name,
                                   "a new environment needs product_id and name")
        product = get(session, m.Product, cmd.product_id, "product")
        if cmd.phase_id is not None:
            phase = get(session, m.Phase, cmd.phase_id, "phase")
            if phase.program_id != product.program_id:
                raise ValidationFailed("phase_id", cmd.phase_id,
                                       "the phase belongs to another program")
        env = _add_unique(session, m.Environment(
            product_id=cmd.product_id, phase_id=cmd.phase_id, name=cmd.name,
            kind=m.EnvironmentKind.time_history, axis=_env_axis(axes), units="g",
            source=cmd.source or src.source, provenance=cmd.provenance),
            f"environment {cmd.name!r} of product {product.name!r}")
        action = "create"
    repo = RevisionRepository(session)
    rev = repo.add(m.EnvironmentRevision(
        environment_id=env.id, number=repo.next_number(env.id), spec=spec, data=None,
        content_hash=content_hash, author=actor.name,
        note=cmd.note or ("first revision" if action == "create" else "")))
    session.add_all(RecordChannel(revision_id=rev.id, **ch) for ch in channels)
    session.flush()

    # pass 2: compress and store; the file must read the same as in pass 1
    rows: list[dict[str, Any]] = []
    pool = ThreadPoolExecutor(max_workers=max(1, min(n_ch, os.cpu_count() or 1)))
    with pool, core_errors(""):
        for k, block in enumerate(src.chunks(chunk_samples)):
            packed = list(pool.map(lambda c, b=block: pack_chunk(b[:, c]), range(n_ch)))
            for c, (blob, h) in enumerate(packed):
                if k >= n_chunks or h != hashes[c][k]:
                    raise Conflict(f"{src.source} changed while it was being imported "
                                   f"(channel {src.channel_names[c]}, chunk {k})")
                rows.append({"revision_id": rev.id, "channel_index": c, "seq": k,
                             "n_samples": int(block.shape[0]), "sha256": h, "data": blob})
            if len(rows) >= _BATCH:
                session.execute(insert(RecordChunk), rows)
                rows = []
            say(0.5 + 0.5 * (k + 1) * chunk_samples / src.n_samples, "storing chunks")
    if rows:
        session.execute(insert(RecordChunk), rows)
    record(session, actor, action, "environment", env.id, revision=rev.number,
           content_hash=content_hash, channels=[ch["name"] for ch in channels],
           samples=src.n_samples, note=rev.note)
    return read_record(session, rev.id)


def pack_chunk_hash(values: np.ndarray) -> str:
    """SHA-256 of a chunk as it is stored (little-endian float64), without compressing."""
    return hashlib.sha256(np.ascontiguousarray(values, dtype="<f8").tobytes()).hexdigest()


def _revision(session: Session, revision_id: int) -> m.EnvironmentRevision:
    rev = get(session, m.EnvironmentRevision, revision_id, "revision")
    if "record" not in (rev.spec or {}):
        raise ValidationFailed("revision_id", revision_id, "is not a chunked record")
    return rev


def read_record(session: Session, revision_id: int) -> RecordRead:
    """The record of a revision: rate, length, channels with their statistics."""
    rev = _revision(session, revision_id)
    info = rev.spec["record"]
    chans = session.scalars(select(RecordChannel).where(RecordChannel.revision_id == rev.id)
                            .order_by(RecordChannel.index)).all()
    return RecordRead(
        environment_id=rev.environment_id, revision=rev.number, revision_id=rev.id,
        fs_hz=info["fs_hz"], n_samples=info["n_samples"],
        duration_s=info["n_samples"] / info["fs_hz"], chunk_samples=info["chunk_samples"],
        n_chunks=info["n_chunks"], content_hash=rev.content_hash,
        channels=[ChannelRead(index=c.index, name=c.name, axis=c.axis, unit=c.unit,
                              source_unit=c.source_unit, calibration=c.calibration,
                              stats=info["stats"][c.index]) for c in chans])


def channel_chunks(session: Session, revision_id: int, channel: int | str) -> Iterator[np.ndarray]:
    """Yield the samples of one channel [g] chunk by chunk, each checked against its hash."""
    rec = read_record(session, revision_id)
    names = {c.name: c.index for c in rec.channels}
    if isinstance(channel, str):
        if channel not in names:
            raise ValidationFailed("channel", channel, f"is not a channel ({sorted(names)})")
        index = names[channel]
    else:
        index = int(channel)
        if not 0 <= index < len(rec.channels):
            raise ValidationFailed("channel", channel, f"must be 0..{len(rec.channels) - 1}")
    for seq in range(0, rec.n_chunks, _BATCH):
        rows = session.execute(
            select(RecordChunk.data, RecordChunk.sha256)
            .where(RecordChunk.revision_id == revision_id, RecordChunk.channel_index == index,
                   RecordChunk.seq >= seq, RecordChunk.seq < seq + _BATCH)
            .order_by(RecordChunk.seq)).all()
        for data, h in rows:
            try:
                yield unpack_chunk(data, h)
            except ValueError as exc:
                raise Conflict(str(exc)) from exc


@dataclass
class ChannelAnalysis:
    """Streaming results of one channel."""

    name: str
    axis: str
    results: dict[str, Any] = field(default_factory=dict)


def analyse_record(session: Session, revision_id: int,
                   make: Callable[[float], dict[str, Any]],
                   progress: Progress | None = None) -> list[ChannelAnalysis]:
    """Run streaming analyses over every channel of a stored record.

    Parameters
    ----------
    make : callable
        ``make(fs_hz)`` returns a fresh dict name -> stream of
        :mod:`qualplan.dynamics.streaming` for one channel.
    progress : callable, optional
        ``progress(fraction, phrase)``.
    """
    rec = read_record(session, revision_id)
    say = progress or (lambda f, t: None)
    out = []
    for c in rec.channels:
        streams = make(rec.fs_hz)
        with core_errors(""):
            for k, x in enumerate(channel_chunks(session, revision_id, c.index)):
                for s_ in streams.values():
                    s_.update(x)
                say((c.index + (k + 1) / rec.n_chunks) / len(rec.channels),
                    f"analysing channel {c.name}")
            out.append(ChannelAnalysis(c.name, c.axis,
                                       {k: s_.result() for k, s_ in streams.items()}))
    return out
