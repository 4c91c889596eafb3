"""The policy basis an issued specification states: "values from memory of <standard>;
to be checked before use" until an approver confirms the policy against the issue in
force, then who checked it and when; an edit of the rules needs a new confirmation."""

from __future__ import annotations

import pytest

from qualplan.planning import documents, policies
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import PermissionDenied, ValidationFailed
from qualplan.reports import PdfRenderer
from qualplan.store import models as m

from .test_documents import pdf_text

APPROVER = Actor("alan", m.Role.approver)


def basis(session, data) -> str:
    content = documents.specification_content(session, data["unit"].id, "qualification")
    (info,) = content.policies
    return info.basis


def test_from_memory_until_confirmed_then_who_and_when(db, tmp_path):
    session, data = db
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    assert basis(session, data) == ("values from memory of GSFC-STD-7000B (GEVS) Table 2.4-1 "
                                    "and section 2.4.2; to be checked before use")
    with pytest.raises(PermissionDenied, match="approver"):
        policies.confirm_policy(session, data["engineer"], gevs.id, "GSFC-STD-7000B (2021)")
    for bad in ("", "two\nlines"):
        with pytest.raises(ValidationFailed, match="issue"):
            policies.confirm_policy(session, APPROVER, gevs.id, bad)
    done = policies.confirm_policy(session, APPROVER, gevs.id, "GSFC-STD-7000B (2021)",
                                   expected_version=gevs.version)
    stated = basis(session, data)
    assert stated == ("GSFC-STD-7000B (GEVS) Table 2.4-1 and section 2.4.2: checked against "
                      f"the issue in force (GSFC-STD-7000B (2021)): alan, "
                      f"{done.created_at:%Y-%m-%d}")
    content = documents.specification_content(session, data["unit"].id, "qualification")
    issued = documents.issue_document(session, data["engineer"], content, PdfRenderer(),
                                      tmp_path)
    text, _ = pdf_text(next(p for p in issued.files if p.suffix == ".pdf"))
    assert "checked against the issue in force" in " ".join(text.split())
    # The confirmation is of the policy's version: editing the rules withdraws it.
    policies.update_policy(session, data["engineer"], gevs.id,
                           s.PolicyUpdate(rules=policies.rules_of(gevs)), gevs.version)
    assert basis(session, data).startswith("values from memory of GSFC-STD-7000B")
