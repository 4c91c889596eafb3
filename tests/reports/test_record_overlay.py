"""A test record against its level: the plotted tolerance band is the band the verdict
used, for random, sine and shock; the record plot of the pages, the SVG file and the
audit PDF draw the same lines; the test sequence of an axis per grade."""

from __future__ import annotations

import re

import numpy as np
import pytest

from qualplan.planning import coverage, documents, evidence
from qualplan.planning import schemas as s
from qualplan.reports import charts, pdf


def _loglog(f, ref_f, ref_v):
    """Straight lines in log-log between breakpoints (the profile convention, closed form)."""
    return np.exp(np.interp(np.log(f), np.log(ref_f), np.log(ref_v)))


def _record_off_by(session, data, db_at: dict[int, float]):
    """A random record on 1/12-octave lines: the level, raised by `db_at[i]` dB on line i."""
    req = data["requirements"]["random"]
    r = data["levels"]["random"].result
    lines = np.geomspace(r["freq_hz"][0], r["freq_hz"][-1], 60)
    v = _loglog(lines, r["freq_hz"], r["asd_g2_hz"])
    for i, d in db_at.items():
        v[i] *= 10 ** (d / 10)
    return evidence.add_test_record(session, data["engineer"], req.id, s.TestEvidenceIn(
        freq_hz=lines.tolist(), values=v.tolist(), duration_s=r["duration_s"])), lines, v


def test_random_band_is_the_verdicts_band(db):
    session, data = db
    # +4 dB on two lines and -3.5 dB on one: outside +/-3 dB (GEVS random tolerance)
    ev, lines, v = _record_off_by(session, data, {10: 4.0, 30: 4.0, 45: -3.5})
    assert ev.verdict.value == "fail" and ev.summary["lines_outside"] == 3
    ov = evidence.record_overlay(session, ev.id)
    r = data["levels"]["random"].result
    tol = r["tolerance_db"]
    # closed form: nominal at the record's lines (log-log), x 10^(+/-tol/10) (power dB)
    nominal = _loglog(lines, r["freq_hz"], r["asd_g2_hz"])
    assert ov.band.freq_hz == pytest.approx(lines.tolist(), rel=1e-12)
    assert ov.band.nominal == pytest.approx(nominal.tolist(), rel=1e-9)
    assert ov.band.lower == pytest.approx((nominal * 10 ** (-tol / 10)).tolist(), rel=1e-9)
    assert ov.band.upper == pytest.approx((nominal * 10 ** (tol / 10)).tolist(), rel=1e-9)
    # the record lines outside the plotted band are exactly the lines the verdict failed
    outside = [i for i, x in enumerate(v) if not ov.band.lower[i] <= x <= ov.band.upper[i]]
    assert outside == [10, 30, 45]
    assert ov.band.label == f"±{tol:g} dB" and ov.verdict == "fail"
    assert ov.reason == ev.summary["reason"] and "3 of 60 lines outside" in ov.reason
    # the reason in words: "±3 dB", a dB with sign and 2 decimals, a frequency to 4
    # significant figures (issue 15 wording; common practice)
    assert "+/-" not in ov.reason and f"±{tol:g} dB" in ov.reason
    worst = re.search(r"worst ([+-]\d+\.\d\d) dB at ([\d.]+) (k?Hz)", ov.reason)
    assert worst is not None, ov.reason
    assert len(worst.group(2).replace(".", "").lstrip("0")) <= 4
    assert ov.unit == "g²/Hz" and ov.quantity == "ASD" and not ov.level_changed


def test_sine_and_shock_bands_are_the_verdicts_bands(db):
    session, data = db
    reqs = data["requirements"]
    sine_ev = evidence.list_evidence(session, reqs["sine"].id)[-1]
    ov = evidence.record_overlay(session, sine_ev.id)
    r = data["levels"]["sine"].result
    f = np.asarray(ov.band.freq_hz)
    nominal = _loglog(f, r["freq_hz"], r["accel_g"])
    p = r["tolerance_pct"] / 100  # amplitude +/- p of nominal (common practice: +/-10 %)
    assert ov.band.lower == pytest.approx((nominal * (1 - p)).tolist(), rel=1e-9)
    assert ov.band.upper == pytest.approx((nominal * (1 + p)).tolist(), rel=1e-9)
    # the record is 20 % under the level: every judged point below the lower line
    rec = dict(zip(ov.record_freq_hz, ov.record_values, strict=True))
    below = sum(rec[x] < lo for x, lo in zip(ov.band.freq_hz, ov.band.lower, strict=True))
    assert below == sine_ev.summary["points_outside"] == len(f) and ov.verdict == "fail"

    shock_ev = evidence.list_evidence(session, reqs["shock"].id)[-1]
    ov = evidence.record_overlay(session, shock_ev.id)
    r = data["levels"]["shock"].result
    f = np.asarray(ov.band.freq_hz)
    nominal = _loglog(f, r["freq_hz"], r["accel_g"])
    # amplitude dB: nominal x 10^(dB/20) (MIL-STD-810H 516.8 style bands)
    assert ov.band.lower == pytest.approx((nominal * 10 ** (r["lower_db"] / 20)).tolist(),
                                          rel=1e-9)
    assert ov.band.upper == pytest.approx((nominal * 10 ** (r["upper_db"] / 20)).tolist(),
                                          rel=1e-9)
    assert ov.quantity == "SRS" and ov.q == r["q"] and ov.verdict == shock_ev.verdict.value


def test_record_plot_draws_the_overlay_band(db):
    session, data = db
    ev, lines, v = _record_off_by(session, data, {20: 5.0})
    ov = evidence.record_overlay(session, ev.id)
    spec = charts.record_plot(ov)
    by_name = {x["name"]: x for x in spec["series"]}
    upper = by_name[f"tolerance {ov.band.label} (upper)"]
    lower = by_name[f"tolerance {ov.band.label} (lower)"]
    assert upper["x"] == ov.band.freq_hz and upper["y"] == ov.band.upper
    assert lower["y"] == ov.band.lower
    assert by_name[f"record #{ev.id} (failed)"]["y"] == pytest.approx(v.tolist())
    svg = charts.record_chart(ov)
    assert svg.lstrip().startswith("<?xml") and "<svg" in svg
    for name in by_name:
        assert name in svg  # legend text kept as text (svg.fonttype none)
    assert charts.PLOT_CAUTION.split(";")[0] in svg
    assert "CAUTION" not in charts.record_chart(ov, caution=False)


def test_audit_pdf_carries_the_records(db, tmp_path):
    session, data = db
    content = documents.audit_content(session, data["program"].id, preview=True)
    keys = sorted(rec.requirement_key for rec in content.records)
    assert keys == ["RU-001", "RU-002", "RU-003", "RU-005"]  # the test requirements
    svgs = pdf.figures(content)
    assert set(svgs) == {f"record-{rec.evidence_id}" for rec in content.records}
    html = pdf.html(content, svgs)
    assert "Test records against their levels" in html
    assert html.count("data:image/svg+xml") == len(content.records)
    out = pdf.pdf_bytes(content, svgs)
    assert out.startswith(b"%PDF")
    (tmp_path / "audit.pdf").write_bytes(out)


def test_audit_hash_unchanged_without_records(db):
    session, data = db
    content = documents.audit_content(session, data["program"].id, preview=True)
    bare = content.model_copy(update={"records": []})
    # no records: the hash is that of the content without the field (older revisions)
    from qualplan.store.hashing import json_hash
    expected = json_hash(bare.model_dump(mode="json", exclude={
        "revision", "history", "preview", "approvals", "records"}))
    assert documents.content_hash(bare) == expected
    assert documents.content_hash(content) != expected


def test_sequence_by_axis_matches_the_specification(db):
    session, data = db
    seq = coverage.product_sequence(session, data["unit"].id, "qualification")
    assert [x.axis for x in seq] == ["X", "Y"]
    assert seq[0].tests == ["random X #1", "sine X #1"]
    spec = documents.specification_content(session, data["unit"].id, "qualification",
                                           preview=True)
    for x, ax in zip(seq, spec.axes, strict=True):
        assert ax.axis == x.axis and ax.tests == x.tests
        if x.coverage is not None:
            assert ax.coverage.fn_hz == x.coverage.fn_hz
            assert ax.coverage.ers.ratio_db == x.coverage.ers.ers_ratio_db


def test_audit_figures_written_as_svg_files(db, tmp_path):
    session, data = db
    content = documents.audit_content(session, data["program"].id, preview=True)
    paths = pdf.PdfRenderer(figures=True).render(content, tmp_path)
    svgs = sorted(p.name for p in paths if p.suffix == ".svg")
    assert svgs == sorted(f"{content.number}-record-{r.evidence_id}.svg"
                          for r in content.records)
    for rec in content.records:
        svg = next(p for p in paths if p.name.endswith(f"-record-{rec.evidence_id}.svg"))
        body = svg.read_text()
        assert f"record #{rec.evidence_id}" in body and f"level {rec.level}" in body
