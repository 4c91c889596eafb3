"""The force limit of a random level as the second table of the specification and a CSV
of its own (NASA-HDBK-7004 semi-empirical method, computed by qualplan.dynamics.transfer).

The oracle is the database: the force limit stored with the level."""

from __future__ import annotations

import csv
import io
import re

import pytest
from pypdf import PdfReader

from qualplan.planning import documents, transfers
from qualplan.reports import PdfRenderer
from qualplan.reports.pdf import _num


def test_force_limit_table_in_pdf_and_csv(db, tmp_path):
    session, data = db
    level = data["levels"]["random"]
    row = transfers.set_level_force_limit(session, data["engineer"], level.id,
                                          transfers.ForceLimitIn(
                                              mass_kg=0.8, c2=2.0, f0_hz=150.0,
                                              modes=[{"fn_hz": 150.0, "mass_kg": 0.5, "q": 10}],
                                              residual_mass_kg=0.1, max_notch_db=6.0))
    stored = row.result
    assert stored["notches"] and stored["needs_acceptance"]
    content = documents.specification_content(session, data["unit"].id, "qualification")
    (section,) = [x for x in content.sections if x.level_id == level.id]
    assert section.force_limit is not None
    # a predicted notch deeper than allowed, not accepted: a warning of the document, as
    # for a response-limit notch
    assert any("a notch predicted by the force limit is deeper than 6 dB" in w
               for w in content.warnings), content.warnings
    paths = PdfRenderer().render(content, tmp_path)
    text = "\n".join(p.extract_text() or "" for p in PdfReader(
        str(next(p for p in paths if p.suffix == ".pdf"))).pages)
    text = re.sub(r"[ \t]+", " ", text)
    assert "Force limit" in text and "N rms" in text and "[N²/Hz]" in text
    for f, v in zip(stored["freq_hz"], stored["fsd_n2_hz"], strict=True):
        assert f"{_num(f)} {_num(v)}" in text
    assert "approver's acceptance needed" in re.sub(r"\s+", " ", text)  # wrapped cell
    (path,) = [p for p in paths if p.name.endswith("-force-limit.csv")]
    raw = path.read_text()
    rows = [r for r in csv.reader(io.StringIO(raw)) if r and not r[0].startswith("#")]
    assert rows[0] == ["freq_hz", "fsd_n2_hz"]
    # 4 significant figures (the one export format): within half a unit of the 4th figure
    assert [float(r[0]) for r in rows[1:]] == pytest.approx(stored["freq_hz"], rel=5e-4)
    assert [float(r[1]) for r in rows[1:]] == pytest.approx(stored["fsd_n2_hz"], rel=5e-4)
    assert "CAUTION: a responsible engineer" in raw
    assert "predicted notch" in raw and "NASA-HDBK-7004" in raw
    # the JSON round-trips with the new table
    body = content.model_dump(mode="json")
    assert documents.SpecificationContent.model_validate(body) == content


def test_deep_notches_need_an_approver_and_the_acceptance_is_printed(db, tmp_path):
    import pytest

    from qualplan.planning.access import Actor
    from qualplan.planning.errors import Conflict, PermissionDenied
    from qualplan.store import models as m

    session, data = db
    level = data["levels"]["random"]
    transfers.set_level_force_limit(session, data["engineer"], level.id, transfers.ForceLimitIn(
        mass_kg=0.8, c2=2.0, f0_hz=150.0, modes=[{"fn_hz": 150.0, "mass_kg": 0.5, "q": 10}],
        residual_mass_kg=0.1, max_notch_db=6.0))
    with pytest.raises(PermissionDenied):
        transfers.accept_notches(session, data["engineer"], level.id, "fine")
    alan = Actor("alan", m.Role.approver)
    row = transfers.accept_notches(session, alan, level.id, "unit qualified by a notched "
                                   "sine survey on the same fixture")
    assert row.result["accepted_by"] == "alan"
    with pytest.raises(Conflict, match="accepted already"):
        transfers.accept_notches(session, alan, level.id, "again")
    assert transfers.level_force_limit(session, level.id).accepted_by == "alan"
    content = documents.specification_content(session, data["unit"].id, "qualification")
    paths = PdfRenderer().render(content, tmp_path)
    text = re.sub(r"\s+", " ", "\n".join(p.extract_text() or "" for p in PdfReader(
        str(next(p for p in paths if p.suffix == ".pdf"))).pages))
    assert "accepted by alan" in text and "notched sine survey" in text


def test_force_limit_without_a_depth_takes_the_policy_notch_limit(db):
    """A force limit set without max_notch_db judges its predicted notches against the
    level policy's control.max_notch_db (10 dB by default, common practice), as
    response-limit notching does; the stored parameters say which limit was used."""
    from qualplan.planning.policies import rules_of
    from qualplan.store import models as m

    session, data = db
    level = data["levels"]["random"]
    assert level.policy is not None
    limit = rules_of(level.policy).control.max_notch_db
    row = transfers.set_level_force_limit(session, data["engineer"], level.id,
                                          transfers.ForceLimitIn(
                                              mass_kg=0.8, c2=2.0, f0_hz=150.0,
                                              modes=[{"fn_hz": 150.0, "mass_kg": 0.5, "q": 10}],
                                              residual_mass_kg=0.1))
    assert row.params["max_notch_db"] == limit
    notches = transfers.level_force_limit(session, level.id).notches
    assert notches
    assert [n.exceeds_policy for n in notches] == [n.depth_db > limit for n in notches]
    assert session.get(m.LevelForceLimit, row.id).result["needs_acceptance"] == any(
        n.depth_db > limit for n in notches)
