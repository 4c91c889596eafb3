"""Response-limit notching of a test level: computed, stored with the level (append-only),
accepted by an approver, printed in the specification and its CSV tables.

Checks by hand (closed forms) against the SDOF transmissibility of a base-excited
oscillator, |T| = sqrt((1 + (2 zeta r)^2) / ((1 - r^2)^2 + (2 zeta r)^2)) (Thomson,
Theory of Vibration with Applications, base excitation), and the notched input
a_n = min(a, L / |T|), S_n = min(S, L / |T|^2) (NASA-HDBK-7004C, response limiting)."""

from __future__ import annotations

import csv
import io
import math
import re

import numpy as np
import pytest
from pypdf import PdfReader
from sqlalchemy import text

from qualplan.planning import documents, notching
from qualplan.planning.access import Actor
from qualplan.planning.errors import Conflict, PermissionDenied, ValidationFailed
from qualplan.reports import PdfRenderer
from qualplan.store import models as m


def sdof_t(f, fn, q):
    """Thomson's base-excitation transmissibility (absolute acceleration) [g/g]."""
    r, z = np.asarray(f) / fn, 0.5 / q
    return np.sqrt((1 + (2 * z * r) ** 2) / ((1 - r ** 2) ** 2 + (2 * z * r) ** 2))


def _survey(f_lo, f_hi, fn, q):
    f = np.unique(np.concatenate([np.geomspace(f_lo, f_hi, 400), [fn]]))
    return f.tolist(), sdof_t(f, fn, q).tolist()


def test_sine_notch_depth_at_resonance_is_the_closed_form(db):
    session, data = db
    level = data["levels"]["sine"]
    f, a = level.result["freq_hz"], level.result["accel_g"]
    fn, q, limit = math.sqrt(f[0] * f[-1]), 10.0, 2.0
    tf, tg = _survey(f[0] * 0.9, f[-1] * 1.1, fn, q)
    row = notching.set_notching(session, data["engineer"], level.id, notching.NotchingIn(
        location="monitor on the lid", limit=limit, transmissibility_freq_hz=tf,
        transmissibility_gain=tg, transmissibility_source="low-level survey",
        max_notch_db=3.0))
    read = notching.read_notching(session, row)
    (notch,) = read.notches
    a_fn = float(np.exp(np.interp(np.log(fn), np.log(f), np.log(a))))
    # depth at fn: 20 log10(|T(fn)| a(fn) / L), |T(fn)| = sqrt(1 + Q^2) for the SDOF
    want = 20 * math.log10(math.sqrt(1 + q ** 2) * a_fn / limit)
    assert notch.depth_db == pytest.approx(want, abs=0.05)
    assert notch.f_lo_hz < fn < notch.f_hi_hz and notch.exceeds_policy == (want > 3.0)
    # every notched point: min(a, L / |T|), |T| the survey table interpolated log-log as
    # a measured table is read (direct calculation with numpy)
    fr = np.asarray(read.freq_hz)
    t_at = np.exp(np.interp(np.log(fr), np.log(tf), np.log(tg)))
    direct = np.minimum(np.asarray(read.original), limit / t_at)
    assert np.asarray(read.notched) == pytest.approx(direct, rel=1e-9)
    assert read.level_hash == level.level_hash and not read.stale
    ev = session.scalars(
        m.Event.__table__.select().where(m.Event.action == "notch")).all()
    assert ev, "the notching is an event of the level"


def test_random_notching_stored_accepted_printed_and_append_only(db, tmp_path):
    session, data = db
    level = data["levels"]["random"]
    f, s_ = level.result["freq_hz"], level.result["asd_g2_hz"]
    fn, q = 2 * f[0] if 2 * f[0] < f[-1] / 2 else math.sqrt(f[0] * f[-1]), 10.0
    s_fn = float(np.exp(np.interp(np.log(fn), np.log(f), np.log(s_))))
    limit = 20.0 * s_fn  # response ASD limit [g^2/Hz], below Q^2 S at fn
    tf, tg = _survey(f[0], f[-1], fn, q)
    cmd = notching.NotchingIn(location="accelerometer A3, power supply board", limit=limit,
                              transmissibility_freq_hz=tf, transmissibility_gain=tg,
                              transmissibility_source="analysis",
                              transmissibility_note="FE model run 7 (invented)",
                              max_notch_db=3.0)
    notching.set_notching(session, data["engineer"], level.id, cmd)
    read = notching.level_notching(session, level.id)
    (notch,) = read.notches
    # depth at fn: 10 log10(|T(fn)|^2 S(fn) / L) = 10 log10((1 + Q^2) / 20) = 7.04 dB
    assert notch.depth_db == pytest.approx(10 * math.log10((1 + q ** 2) / 20.0), abs=0.05)
    assert read.needs_acceptance and read.grms_after < read.grms_before
    # the notched overall, by direct trapezoidal integration of the stored dense profile
    assert read.grms_after == pytest.approx(
        math.sqrt(np.trapezoid(read.notched, read.freq_hz)), rel=2e-3)
    with pytest.raises(PermissionDenied):
        notching.accept_notching(session, data["engineer"], level.id, "fine")
    alan = Actor("alan", m.Role.approver)
    with pytest.raises(ValidationFailed, match="rationale"):
        notching.accept_notching(session, alan, level.id, "  ")
    notching.accept_notching(session, alan, level.id, "board qualified to the deeper level "
                             "by similarity")
    with pytest.raises(Conflict, match="accepted already"):
        notching.accept_notching(session, alan, level.id, "again")
    rows = session.scalars(m.LevelNotching.__table__.select()
                           .where(m.LevelNotching.level_id == level.id)).all()
    assert len(rows) == 2  # the acceptance is the next row; the first is kept
    with pytest.raises(Exception, match="immutable"):  # the table's trigger (0013)
        with session.begin_nested():
            session.execute(text("UPDATE level_notchings SET author = 'x'"))

    content = documents.specification_content(session, data["unit"].id, "qualification")
    (section,) = [x for x in content.sections if x.level_id == level.id]
    assert section.notching is not None and section.notching.accepted_by == "alan"
    paths = PdfRenderer().render(content, tmp_path)
    pdf = re.sub(r"\s+", " ", "\n".join(p.extract_text() or "" for p in PdfReader(
        str(next(p for p in paths if p.suffix == ".pdf"))).pages))
    assert "Notched against a response limit at accelerometer A3" in pdf
    assert "accepted by alan" in pdf and "FE model run 7" in pdf
    (path,) = [p for p in paths if p.name.endswith("-notched.csv")]
    raw = path.read_text()
    body = [r for r in csv.reader(io.StringIO(raw)) if r and not r[0].startswith("#")]
    assert body[0] == ["freq_hz", "level_g2_hz", "notched_g2_hz"]
    # the one table format: 4 significant figures, within half a unit of the 4th figure
    assert [float(r[2]) for r in body[1:]] == pytest.approx(read.notched, rel=5e-4)
    assert "accepted by alan" in raw and "NASA-HDBK-7004C" in raw
    level_csv = next(p for p in paths if p.name.endswith("-random-random-x.csv")
                     or (p.name.endswith(".csv") and "-X-random-" in p.name
                         and "notched" not in p.name and "force" not in p.name))
    assert "# NOTCHED against a response limit" in level_csv.read_text()


def test_notching_refuses_bad_input_and_stores_nothing(db):
    session, data = db
    level = data["levels"]["random"]
    f = level.result["freq_hz"]
    with pytest.raises(ValidationFailed, match="transmissibility_freq_hz"):
        notching.set_notching(session, data["engineer"], level.id, notching.NotchingIn(
            location="lid", limit=0.1, transmissibility_freq_hz=[f[0] * 2, f[-1]],
            transmissibility_gain=[1.0, 2.0], transmissibility_source="analysis"))
    with pytest.raises(ValueError, match="not both"):
        notching.NotchingIn(location="lid", limit=0.1, limit_freq_hz=[10.0, 20.0],
                            limit_values=[1.0, 1.0], transmissibility_freq_hz=[1.0, 2.0],
                            transmissibility_gain=[1.0, 1.0], transmissibility_source="analysis")
    with pytest.raises(ValidationFailed, match="gain"):
        notching.set_notching(session, data["engineer"], level.id, notching.NotchingIn(
            location="lid", limit=0.1, transmissibility_freq_hz=[f[0], f[-1]],
            transmissibility_gain=[1.0, -2.0], transmissibility_source="analysis"))
    assert notching.level_notching(session, level.id) is None
