"""Evidence against a requirement: analysis, test record, similarity, inspection."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, File, Form, UploadFile

from qualplan.api.deps import ActorDep, PageDep, ReaderDep, SessionDep
from qualplan.api.models import Page
from qualplan.planning import evidence
from qualplan.planning import schemas as s

router = APIRouter(prefix="/requirements/{requirement_id}/evidence", tags=["evidence"])


@router.get("", response_model=Page[s.EvidenceRead])
def list_evidence(requirement_id: int, session: SessionDep, _: ReaderDep, page: PageDep):
    rows = evidence.list_evidence(session, requirement_id)
    items = [s.EvidenceRead.model_validate(r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.post("/analysis", status_code=201, response_model=s.EvidenceRead)
def add_analysis(
    requirement_id: int, cmd: s.AnalysisEvidenceIn, session: SessionDep, actor: ActorDep
):
    """MS = allowable / (FS x applied) - 1 against the required margin."""
    return s.EvidenceRead.model_validate(
        evidence.add_analysis(session, actor, requirement_id, cmd)
    )


@router.post("/test", status_code=201, response_model=s.EvidenceRead)
def add_test_record(
    requirement_id: int, cmd: s.TestEvidenceIn, session: SessionDep, actor: ActorDep
):
    """An achieved control spectrum, checked against the level's tolerances."""
    return s.EvidenceRead.model_validate(
        evidence.add_test_record(session, actor, requirement_id, cmd)
    )


@router.post("/similarity", status_code=201, response_model=s.EvidenceRead)
def add_similarity(
    requirement_id: int, cmd: s.SimilarityEvidenceIn, session: SessionDep, actor: ActorDep
):
    return s.EvidenceRead.model_validate(
        evidence.add_similarity(session, actor, requirement_id, cmd)
    )


@router.post("/inspection", status_code=201, response_model=s.EvidenceRead)
def add_inspection(
    requirement_id: int, cmd: s.InspectionEvidenceIn, session: SessionDep, actor: ActorDep
):
    return s.EvidenceRead.model_validate(
        evidence.add_inspection(session, actor, requirement_id, cmd)
    )


@router.post("/test/upload", status_code=201, response_model=s.EvidenceRead)
def upload_test_record(
    requirement_id: int,
    session: SessionDep,
    actor: ActorDep,
    file: Annotated[UploadFile, File(description="CSV (Hz, value) or JSON test record")],
    value_units: Annotated[str | None, Form(description="g^2/Hz, (m/s^2)^2/Hz, g, m/s^2")] = None,
    duration_s: Annotated[float | None, Form(gt=0)] = None,
    shocks: Annotated[int | None, Form(ge=0)] = None,
    note: Annotated[str, Form()] = "",
):
    """A test record uploaded as a file, checked against the level's tolerances."""
    row = evidence.add_test_record_file(
        session,
        actor,
        requirement_id,
        file.filename or "upload",
        file.file.read(),
        value_units=value_units,
        duration_s=duration_s,
        shocks=shocks,
        note=note,
    )
    return s.EvidenceRead.model_validate(row)
