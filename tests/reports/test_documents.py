"""Specification and audit documents rendered from a fixture database and read back.

The oracle is the database itself (the level results and audit statuses stored by the
planning use cases), never a number of our own typed here.
"""

from __future__ import annotations

import csv
import io
import os
import re
import subprocess
import sys

import pytest
from pypdf import PdfReader
from sqlalchemy import select

from qualplan.dynamics import psd as core_psd
from qualplan.planning import audit, documents, environments, imports, wording
from qualplan.planning import schemas as s
from qualplan.planning.errors import Conflict, ValidationFailed
from qualplan.reports import PdfRenderer, tables
from qualplan.reports.pdf import _num
from qualplan.store import models as m


def pdf_text(path) -> tuple[str, int]:
    reader = PdfReader(str(path))
    text = "\n".join(page.extract_text() or "" for page in reader.pages)
    return re.sub(r"[ \t]+", " ", text), len(reader.pages)


def test_specification_pdf_shows_the_stored_levels(db, tmp_path):
    session, data = db
    content = documents.specification_content(session, data["unit"].id, "qualification")
    issued = documents.issue_document(session, data["engineer"], content, PdfRenderer(),
                                      tmp_path)
    pdf = next(p for p in issued.files if p.suffix == ".pdf")
    text, pages = pdf_text(pdf)
    assert 3 <= pages <= 15  # a few levels, their plots and the derivation appendix
    assert f"{content.number}" in text and "Caution." in text
    random = data["levels"]["random"].result
    for f, a in zip(random["freq_hz"], random["asd_g2_hz"], strict=True):
        assert f"{_num(f)} {_num(a)}" in text  # each breakpoint row: Hz, g^2/Hz
    assert f"{_num(random['grms'])} g rms" in text
    # durations in s, min or h as fits: GEVS 2 min per axis (120 s) reads "2 min"
    assert f"{wording.duration(random['duration_s'])} per axis" in text.replace("\n", " ")
    assert wording.duration(random["duration_s"]) == "2 min"
    shock = data["levels"]["shock"].result
    for f, a in zip(shock["freq_hz"], shock["accel_g"], strict=True):
        assert f"{_num(f)} {_num(a)}" in text
    sine = data["levels"]["sine"].result
    assert f"{_num(sine['peak_accel_g'])} g peak" in text
    assert "oct/min" in text and "[Hz]" in text and "[g²/Hz]" in text
    # The acceptance level of the same name is not in the qualification document.
    assert len(content.sections) == 3


def test_audit_pdf_shows_the_computed_statuses(db, tmp_path):
    session, data = db
    report = audit.audit(session, data["program"].id)
    content = documents.audit_content(session, data["program"].id)
    issued = documents.issue_document(session, data["engineer"], content, PdfRenderer(),
                                      tmp_path)
    text, pages = pdf_text(next(p for p in issued.files if p.suffix == ".pdf"))
    # five pages of tables, then the test records over their levels, two plots a page
    assert len(content.records) == 4
    assert 1 <= pages <= 5 + (len(content.records) + 1) // 2
    assert "Test records against their levels" in text
    for rec in content.records:
        assert f"{rec.requirement_key}: record #{rec.evidence_id}" in text
    assert report.verdict in text.replace("\n", " ")
    for item in report.items:
        assert re.search(rf"{item.key}\b.*?\b{item.status}\b", text, re.S), item.key
    statuses = {i.status for i in report.items}
    assert {"verified", "failed", "open"} <= statuses
    assert "Sign-off" in text and "Items blocking release" in text


def test_csv_round_trips_into_the_random_core(db, tmp_path):
    session, data = db
    content = documents.specification_content(session, data["unit"].id, "qualification")
    paths = PdfRenderer().render(content, tmp_path)
    random = data["levels"]["random"].result
    (path,) = [p for p in paths if p.suffix == ".csv" and "-random-" in p.name]
    raw = path.read_bytes()
    table = imports.breakpoints_from_csv(m.EnvironmentKind.random, raw, value_units="g^2/Hz")
    # The table is written to 4 significant figures (the lab's controller entry): each
    # value within half a unit of the 4th figure of the stored one, the g rms with it.
    assert table["freq_hz"] == pytest.approx(random["freq_hz"], rel=5e-4)
    assert table["asd_g2_hz"] == pytest.approx(random["asd_g2_hz"], rel=5e-4)
    assert core_psd.grms(table["freq_hz"], table["asd_g2_hz"]) == pytest.approx(
        random["grms"], rel=1e-3)
    rows = [r for r in csv.reader(io.StringIO(raw.decode())) if r and not r[0].startswith("#")]
    assert rows[0] == ["freq_hz", "asd_g2_hz"]
    # With 17 significant figures the stored floats come back exactly.
    section = next(x for x in content.sections if x.kind == "random")
    exact = tables.section_csv(content, section, digits=17).encode()
    again = imports.breakpoints_from_csv(m.EnvironmentKind.random, exact, value_units="g^2/Hz")
    assert again["freq_hz"] == [r.freq_hz for r in section.random.rows]
    assert again["asd_g2_hz"] == [r.asd_g2_hz for r in section.random.rows]


def test_json_carries_the_content_and_its_hash(db, tmp_path):
    import json

    session, data = db
    content = documents.specification_content(session, data["unit"].id, "qualification")
    paths = PdfRenderer().render(content, tmp_path)
    body = json.loads(next(p for p in paths if p.suffix == ".json").read_text())
    assert body["content_hash"] == content.content_hash()
    assert body["input_hashes"]["levels"][str(data["levels"]["random"].id)] == \
        data["levels"]["random"].level_hash
    assert "responsible engineer" in body["caution"]
    assert documents.SpecificationContent.model_validate(
        {k: v for k, v in body.items() if k not in ("content_hash", "caution")}) == content


def test_same_state_same_content_and_revisions(db, tmp_path):
    session, data = db
    unit, eng = data["unit"], data["engineer"]
    a = documents.specification_content(session, unit.id, "qualification")
    b = documents.specification_content(session, unit.id, "qualification")
    assert a == b and a.content_hash() == b.content_hash() and a.revision == 1
    first = documents.issue_document(session, eng, a, PdfRenderer(), tmp_path)
    assert first.new_revision and first.revision == 1
    again = documents.issue_document(
        session, eng, documents.specification_content(session, unit.id, "qualification"),
        PdfRenderer(), tmp_path)
    assert not again.new_revision and again.document_id == first.document_id
    doc = session.get(m.Document, first.document_id)
    assert doc.content_hash == a.content_hash()
    assert doc.input_hashes["levels"] == {str(x.id): x.level_hash
                                          for x in data["levels"].values()
                                          if x.grade is m.Grade.qualification}
    events = session.scalars(select(m.Event).where(
        m.Event.entity == "document", m.Event.entity_id == first.document_id)).all()
    assert [e.action for e in events] == ["issue"]
    # A new revision of an input makes the levels on X stale: the default baseline leaves
    # them out, a preview shows them marked, an issue naming them is refused.
    environments.revise_environment(session, eng, data["flight_x"].id, s.RevisionIn(
        data={"freq_hz": [20.0, 80.0, 350.0, 2000.0],
              "asd_g2_hz": [0.003, 0.015, 0.015, 0.0015]}, note="new flight data"))
    stale_ids = {x.level_id for x in documents.default_baseline(session, unit.id,
                                                                 "qualification")
                 if not x.taken}
    assert data["levels"]["random"].id in stale_ids
    preview = documents.specification_content(session, unit.id, "qualification", preview=True)
    assert preview.preview and preview.revision == 0 and preview.history == []
    assert any("STALE" in w for w in preview.warnings)
    with pytest.raises(ValidationFailed, match="preview"):
        documents.issue_document(session, eng, preview, PdfRenderer(), tmp_path)
    with pytest.raises(ValidationFailed, match="may not be issued: environment 'flight X'"):
        documents.specification_content(session, unit.id, "qualification",
                                        level_ids=[data["levels"]["random"].id])
    c = documents.specification_content(session, unit.id, "qualification", note="stale out")
    assert {sec.level_id for sec in c.sections}.isdisjoint(stale_ids)
    assert c.revision == 2 and [h.revision for h in c.history] == [1, 2]
    with pytest.raises(Conflict, match="revision"):
        documents.issue_document(session, eng, c.model_copy(update={"revision": 3}),
                                 PdfRenderer(), tmp_path)
    second = documents.issue_document(session, eng, c, PdfRenderer(), tmp_path)
    assert second.new_revision and second.revision == 2
    # the selection is stored with the revision, in the document's order
    assert documents.document_levels(session, second.document_id) == [
        sec.level_id for sec in c.sections]


def test_a_grade_without_levels_is_refused(db):
    session, data = db
    with pytest.raises(ValidationFailed, match="no protoflight test level"):
        documents.specification_content(session, data["unit"].id, "protoflight")


def test_pdf_bytes_are_reproducible(db):
    from qualplan.reports import pdf_bytes

    session, data = db
    content = documents.audit_content(session, data["program"].id)
    first = pdf_bytes(content)
    assert first.startswith(b"%PDF-") and pdf_bytes(content) == first


# Renders one document given as JSON on stdin and writes its PDF bytes to stdout.
_RENDER_IN_A_NEW_PROCESS = """
import sys
from qualplan.planning import documents
from qualplan.reports import pdf_bytes
kind = {"audit": documents.AuditContent, "specification": documents.SpecificationContent}
content = kind[sys.argv[1]].model_validate_json(sys.stdin.buffer.read())
sys.stdout.buffer.write(pdf_bytes(content))
"""


@pytest.mark.parametrize("kind", ["audit", "specification"])
def test_pdf_bytes_are_the_same_in_another_process(db, kind):
    """Another interpreter (other hash seed, a later second of the clock) gives the same
    PDF from the same content: no clock, hash order or process state leaks into it."""
    from qualplan.reports import pdf_bytes

    session, data = db
    content = (documents.audit_content(session, data["program"].id) if kind == "audit"
               else documents.specification_content(session, data["unit"].id, "qualification"))
    here = pdf_bytes(content)
    env = {**os.environ, "PYTHONHASHSEED": "12345"}
    env.pop("SOURCE_DATE_EPOCH", None)
    run = subprocess.run([sys.executable, "-c", _RENDER_IN_A_NEW_PROCESS, kind],
                         input=content.model_dump_json().encode(), capture_output=True,
                         env=env, timeout=300)
    assert run.returncode == 0, run.stderr.decode(errors="replace")[-2000:]
    there = run.stdout
    at = next((i for i, (a, b) in enumerate(zip(here, there, strict=False)) if a != b),
              min(len(here), len(there)))
    assert here.startswith(b"%PDF-") and there == here, (
        f"{len(here)} vs {len(there)} bytes, first difference at byte {at}: "
        f"{here[at - 40:at + 40]!r} vs {there[at - 40:at + 40]!r}")
