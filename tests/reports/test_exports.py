"""The one breakpoint-table format: every CSV that leaves qualplan read back with Python's
csv module (comment lines, header, values), and no value cell with more significant
figures than stated."""

from __future__ import annotations

import csv
import io
import json
import math
import re

import pytest

from qualplan.dynamics.errors import InputError
from qualplan.planning import audit, documents, wording
from qualplan.reports import PdfRenderer, tables

G = 9.80665  # standard gravity [m/s^2] (CGPM 1901, ISO 80000-3)
HEADERS = {
    "random": ["freq_hz", "asd_g2_hz"],
    "shock": ["freq_hz", "accel_g"],
    "sine": ["f_lo_hz", "f_hi_hz", "quantity", "amplitude", "unit"],
}
NUMBER = re.compile(r"^-?(\d+)(\.(\d+))?(e-?\d+)?$")


def read_table(text: str) -> tuple[list[str], list[str], list[list[str]]]:
    """Comment lines (without '# '), header, data rows, as a lab's script would read."""
    lines = text.splitlines()
    comments = [x[2:] for x in lines if x.startswith("#")]
    body = [x for x in lines if not x.startswith("#")]
    assert all(x.startswith("# ") for x in lines[:len(comments)]), "comments come first"
    rows = list(csv.reader(io.StringIO("\n".join(body))))
    return comments, rows[0], rows[1:]


def significant(cell: str) -> int:
    """Significant figures of a number as written ('0.04965' -> 4, '2000' -> 1 to 4)."""
    m = NUMBER.match(cell)
    assert m, f"not a plain number: {cell!r}"
    digits = (m.group(1) + (m.group(3) or "")).lstrip("0")
    if m.group(3) is None:
        digits = digits.rstrip("0") or "0"
    return len(digits)


def numeric_cells(header: list[str], rows: list[list[str]]) -> list[str]:
    return [c for r in rows for h, c in zip(header, r, strict=True)
            if h not in ("quantity", "unit") and c != ""]


def test_every_document_csv_reads_back(db, tmp_path):
    session, data = db
    content = documents.specification_content(session, data["unit"].id, "qualification")
    paths = PdfRenderer().render(content, tmp_path)
    csvs = [p for p in paths if p.suffix == ".csv"]
    assert {s.kind for s in content.sections} == {"random", "sine", "shock"}
    assert len(csvs) == len(content.sections)
    for section in content.sections:
        path = tmp_path / f"{tables.section_file_stem(content, section)}.csv"
        text = path.read_text(encoding="utf-8")
        assert text.isascii(), path.name
        comments, header, rows = read_table(text)
        assert header == HEADERS[section.kind]
        joined = "\n".join(comments)
        assert f"document {content.number} revision {content.revision}" in joined
        assert f"level {section.name} #{section.number}" in joined
        assert f"axis {section.axis}" in joined and "grade qualification" in joined
        assert f"level hash {section.level_hash}" in joined
        assert "units:" in joined and "tolerances:" in joined
        assert comments[-1] == wording.CAUTION
        for cell in numeric_cells(header, rows):
            assert significant(cell) <= 4, (path.name, cell)
        if section.kind == "random":
            t = section.random
            assert "duration 30 min per axis" in joined or "duration" in joined
            assert [float(r[0]) for r in rows] == pytest.approx(
                [x.freq_hz for x in t.rows], rel=5e-4)
            assert [float(r[1]) for r in rows] == pytest.approx(
                [x.asd_g2_hz for x in t.rows], rel=5e-4)
        elif section.kind == "shock":
            t = section.shock
            assert f"{t.shocks_per_axis} per axis" in joined
            assert [float(r[1]) for r in rows] == pytest.approx(
                [x.accel_g for x in t.rows], rel=5e-4)
        else:
            check_sine_bands(section, comments, rows)


def check_sine_bands(section, comments, rows):
    """The bands a lab sets up, not interpolated points: held displacement in mm
    peak-to-peak, then acceleration in g peak, meeting at the crossover where
    x_pk_pk = 2 a / (2 pi f)^2 (sine kinematics, closed form)."""
    assert "1 sweep" in "\n".join(comments)  # wording.count, singular
    assert [r[2] for r in rows] == ["displacement_pk_pk", "acceleration_pk"]
    assert [r[4] for r in rows] == ["mm", "g"]
    (lo1, hi1, _, disp_mm, _), (lo2, hi2, _, acc_g, _) = [
        (float(r[0]), float(r[1]), r[2], float(r[3]), r[4]) for r in rows]
    assert (lo1, hi1, lo2, hi2) == (5.0, 15.0, 15.0, 100.0)
    expected_mm = 2 * acc_g * G / (2 * math.pi * 15.0) ** 2 * 1000
    assert disp_mm == pytest.approx(expected_mm, rel=1e-3)
    # and the fixture's 1.5 g input scaled by the level's margin (same factor on both)
    fixture_mm = 2 * 1.5 * G / (2 * math.pi * 15.0) ** 2 * 1000
    assert disp_mm / fixture_mm == pytest.approx(acc_g / 1.5, rel=1e-3)
    assert len(rows) == 2 != len(section.sine.points)


def test_force_limit_and_audit_csv_read_back(db):
    session, data = db
    content = documents.audit_content(session, data["program"].id)
    comments, header, rows = read_table(tables.audit_csv(content))
    assert header[:6] == ["key", "product", "level", "method", "required_margin",
                          "achieved_margin"]
    assert any("responsible engineer" in c for c in comments)
    assert {r[0] for r in rows} == {i.key for i in content.items}
    for r in rows:
        for cell in (r[4], r[5]):
            if cell:
                assert significant(cell) <= 4, cell


def test_stale_levels_say_so_in_the_table(db):
    from qualplan.planning import environments
    from qualplan.planning import schemas as s

    session, data = db
    environments.revise_environment(session, data["engineer"], data["flight_x"].id,
                                    s.RevisionIn(data={"freq_hz": [20.0, 2000.0],
                                                       "asd_g2_hz": [0.01, 0.01]}, note="new"))
    export = documents.level_export(session, data["levels"]["random"].id)
    comments, header, _ = read_table(tables.level_export_csv(export))
    assert header == HEADERS["random"]
    assert any(c.startswith("STALE: ") for c in comments)
    assert "not part of an issued document" in comments[0]


def test_precision_option_and_its_bounds(db):
    session, data = db
    export = documents.level_export(session, data["levels"]["shock"].id)
    _, header, rows = read_table(tables.level_export_csv(export, digits=6))
    assert max(significant(c) for c in numeric_cells(header, rows)) <= 6
    _, header, rows = read_table(tables.level_export_csv(export, digits=2))
    assert max(significant(c) for c in numeric_cells(header, rows)) <= 2
    for bad in (0, 18):
        with pytest.raises(InputError, match="digits"):
            tables.level_export_csv(export, digits=bad)


def test_names_cannot_break_a_table(db):
    """A level name with a newline stays on its comment line; a text cell that starts
    like a formula is quoted (OWASP CSV injection)."""
    session, data = db
    export = documents.level_export(session, data["levels"]["random"].id)
    evil = export.model_copy(update={"section": export.section.model_copy(
        update={"name": "x\n=HYPERLINK(1)\r\nfreq_hz,1"})})
    comments, header, rows = read_table(tables.level_export_csv(evil))
    assert header == HEADERS["random"] and all(len(r) == 2 for r in rows)
    text = tables.plain_csv(["a\nb"], ["key", "value"], [["=1+1", 1.23456789]])
    comments, header, rows = read_table(text)
    assert comments[0] == "a b" and rows == [["'=1+1", "1.235"]]


def test_json_exports_carry_the_caution(db, tmp_path):
    session, data = db
    content = documents.audit_content(session, data["program"].id)
    body = json.loads(tables.content_json(content))
    assert body["caution"] == wording.CAUTION
    export = documents.level_export(session, data["levels"]["sine"].id)
    assert json.loads(export.model_dump_json())["caution"] == wording.CAUTION
    assert audit.audit(session, data["program"].id).items
