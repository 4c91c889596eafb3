"""Chunked multi-channel records: import through qualplan.io.streams, read back, analyse.

Runs on SQLite and PostgreSQL (the README's two test runs)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import scipy.signal
from sqlalchemy import func, select, text
from sqlalchemy.exc import DBAPIError

from qualplan.dynamics import fatigue, signal, streaming
from qualplan.dynamics.errors import AccuracyWarning
from qualplan.io import streams
from qualplan.planning import environments as envs
from qualplan.planning import records
from qualplan.planning.errors import Conflict, PermissionDenied, ValidationFailed
from qualplan.store import models as m
from qualplan.store.guards import ImmutableRowError
from qualplan.store.records import RecordChunk, record_hash

FS = 2000.0
G0 = 9.80665


def _record(n=20_011, seed=2):
    rng = np.random.default_rng(seed)
    sos = scipy.signal.butter(4, [20.0, 400.0], btype="band", fs=FS, output="sos")
    return scipy.signal.sosfilt(sos, rng.standard_normal((n, 3)), axis=0)


@pytest.fixture
def npy(tmp_path):
    x = _record()
    p = tmp_path / "flight.npy"
    np.save(p, x * G0)  # invented record in m/s^2
    return p, x


def _import(session, engineer, unit, src, **kw):
    return records.import_record(session, engineer, records.RecordImport(
        product_id=unit.id, name="flight 1", channel_axes=["X", "Y", "Z"], **kw), src,
        chunk_samples=1000)


def test_import_read_back_and_hash(session, engineer, unit, npy):
    p, x = npy
    src = streams.open_npy_record(p, fs_hz=FS, unit="m/s^2", channel_names=["ax", "ay", "az"])
    rec = _import(session, engineer, unit, src)
    assert (rec.n_samples, rec.n_chunks, len(rec.channels)) == (20_011, 21, 3)
    assert [c.axis for c in rec.channels] == ["X", "Y", "Z"]
    env = envs.environment_by_id(session, rec.environment_id)
    assert env.kind is m.EnvironmentKind.time_history and env.axis is m.Axis.all
    for c in range(3):
        back = np.concatenate(list(records.channel_chunks(session, rec.revision_id, c)))
        np.testing.assert_allclose(back, x[:, c], rtol=1e-15)  # m/s^2 / 9.80665 -> g
    y = np.concatenate(list(records.channel_chunks(session, rec.revision_id, "ay")))
    np.testing.assert_allclose(y, x[:, 1], rtol=1e-15)
    # the statistics stored at import are those of the samples (numpy reference)
    assert rec.channels[2].stats["rms"]["value"] == pytest.approx(
        np.sqrt(np.mean(x[:, 2] ** 2)), rel=1e-12)
    # the revision hash covers every chunk: recompute it from the stored rows
    rev = session.get(m.EnvironmentRevision, rec.revision_id)
    rows = session.execute(select(RecordChunk.sha256).where(
        RecordChunk.revision_id == rev.id).order_by(RecordChunk.channel_index,
                                                    RecordChunk.seq)).scalars().all()
    chans = [{"index": c.index, "name": c.name, "axis": c.axis, "unit": c.unit,
              "source_unit": c.source_unit, "calibration": c.calibration}
             for c in rec.channels]
    assert record_hash(rev.spec, chans, rows) == rev.content_hash
    hist = envs.history(session, env.id)
    assert hist[0].summary["channels"]["value"] == 3
    assert hist[0].summary["duration"]["unit"] == "s"


def test_same_record_again_is_refused_and_a_change_is_a_revision(session, engineer, unit,
                                                                 npy, tmp_path):
    p, x = npy
    rec = _import(session, engineer, unit,
                  streams.open_npy_record(p, fs_hz=FS, unit="m/s^2"))
    again = records.RecordImport(environment_id=rec.environment_id,
                                 channel_axes=["X", "Y", "Z"])
    with pytest.raises(Conflict, match="identical"):
        records.import_record(session, engineer, again,
                              streams.open_npy_record(p, fs_hz=FS, unit="m/s^2"),
                              chunk_samples=1000)
    x2 = x.copy()
    x2[12_345, 1] += 1e-9  # one sample in one chunk
    p2 = tmp_path / "flight2.npy"
    np.save(p2, x2 * G0)
    rec2 = records.import_record(session, engineer, again,
                                 streams.open_npy_record(p2, fs_hz=FS, unit="m/s^2"),
                                 chunk_samples=1000)
    assert rec2.revision == 2 and rec2.content_hash != rec.content_hash


def test_bad_axes_bad_samples_and_roles(session, engineer, viewer, unit, npy, tmp_path):
    p, x = npy
    src = streams.open_npy_record(p, fs_hz=FS, unit="m/s^2")
    with pytest.raises(ValidationFailed, match="channel_axes"):
        records.import_record(session, engineer, records.RecordImport(
            product_id=unit.id, name="r", channel_axes=["X", "Y"]), src)
    with pytest.raises(PermissionDenied):
        records.import_record(session, viewer, records.RecordImport(
            product_id=unit.id, name="r", channel_axes=["X", "Y", "Z"]), src)
    bad = x.copy()
    bad[15_000, 2] = np.inf
    pb = tmp_path / "bad.npy"
    np.save(pb, bad)
    # the database is shared by the run (API tests commit their uploads): count, not "none"
    chunks_before = session.scalar(select(func.count()).select_from(RecordChunk))
    with pytest.raises(ValidationFailed, match=r"ch2\[15000\]"):
        _import(session, engineer, unit, streams.open_npy_record(pb, fs_hz=FS, unit="g"))
    # nothing written: no chunk, no environment for the unit
    assert session.scalar(select(func.count()).select_from(RecordChunk)) == chunks_before
    assert session.scalar(select(m.Environment.id).where(
        m.Environment.product_id == unit.id).limit(1)) is None
    with pytest.raises(ValidationFailed, match="fs_hz"):
        records.open_record_file(p, unit="g")


def test_chunks_are_append_only(session, engineer, unit, npy):
    p, _ = npy
    rec = _import(session, engineer, unit, streams.open_npy_record(p, fs_hz=FS, unit="g"))
    with pytest.raises(DBAPIError, match="immutable"):  # the database trigger (0007)
        with session.begin_nested():
            session.execute(text("UPDATE record_chunks SET n_samples = 1"))
    with pytest.raises(DBAPIError, match="immutable"):
        with session.begin_nested():
            session.execute(text("DELETE FROM record_channels"))
    chunk = session.scalar(select(RecordChunk).where(RecordChunk.revision_id == rec.revision_id)
                           .limit(1))
    chunk.n_samples = 1
    with pytest.raises(ImmutableRowError):  # the ORM guard
        session.flush()


def test_streaming_analysis_of_a_stored_record_equals_whole_record(session, engineer, unit,
                                                                  npy):
    p, x = npy
    rec = _import(session, engineer, unit, streams.open_npy_record(p, fs_hz=FS, unit="m/s^2"))
    fn = np.geomspace(20.0, 150.0, 5)

    def make(fs):
        return {"welch": streaming.WelchStream(fs, resolution_hz=4.0),
                "fds": streaming.FdsStream(1 / fs, fn, 10.0, 5.0)}

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        out = records.analyse_record(session, rec.revision_id, make)
        for c, res in enumerate(out):
            xc = np.concatenate(list(records.channel_chunks(session, rec.revision_id, c)))
            np.testing.assert_allclose(res.results["welch"].asd_g2_hz,
                                       signal.welch_psd(xc, FS, resolution_hz=4.0).asd_g2_hz,
                                       rtol=1e-12)
            np.testing.assert_allclose(res.results["fds"],
                                       fatigue.fds_time(xc, 1 / FS, fn, 10.0, 5.0), rtol=1e-12)
    assert [r.axis for r in out] == ["X", "Y", "Z"]
