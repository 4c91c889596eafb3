"""Levels: derive from environment revisions, read with the stale flag, list."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Request
from fastapi.responses import Response

from qualplan.api.deps import ActorDep, PageDep, ReaderDep, SessionDep
from qualplan.api.models import Page
from qualplan.api.routers.jobs import ACCEPTED, JobOption, accepted, runner_name
from qualplan.planning import approvals, documents, jobs, levels
from qualplan.planning import schemas as s
from qualplan.reports import tables

router = APIRouter(tags=["levels"])


def _level(session, level_id: int):
    return levels.level_by_id(session, level_id)


@router.post("/levels", status_code=201, response_model=s.LevelRead, responses=ACCEPTED)
def derive(recipe: s.LevelRecipe, request: Request, session: SessionDep, actor: ActorDep,
           job: Annotated[bool, JobOption] = False):
    """Derive a level (the next number of `recipe.name` for the product). With
    `job=true` (many or long inputs: records, `fds_equivalent` over many environments)
    the derivation runs as a job: 202 with the job, whose result links the level."""
    if job:
        return accepted(request, session, jobs.submit_derivation(
            session, actor, recipe, runner=runner_name(request)))
    return levels.read_level(session, levels.derive_level(session, actor, recipe))


@router.get("/levels", response_model=Page[s.LevelRead])
def list_levels(
    session: SessionDep, _: ReaderDep, page: PageDep, product_id: int | None = None
):
    rows = levels.list_levels(session, product_id)
    items = [levels.read_level(session, r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.get("/levels/{level_id}", response_model=s.LevelRead)
def get_level(level_id: int, session: SessionDep, _: ReaderDep):
    """The level with `stale` and the reasons, when its inputs changed since."""
    return levels.read_level(session, _level(session, level_id))


@router.post("/levels/{level_id}/withdrawal", status_code=201, response_model=s.WithdrawalRead)
def withdraw_level(level_id: int, cmd: s.WithdrawIn, session: SessionDep, actor: ActorDep):
    """Withdraw a level (engineer or higher), with a reason: it leaves the default
    baselines; the requirements on it become stale."""
    return s.WithdrawalRead.model_validate(
        approvals.withdraw_level(session, actor, level_id, cmd.reason))


@router.post("/levels/{level_id}/rederive", response_model=s.LevelDifference)
def rederive(level_id: int, session: SessionDep, actor: ActorDep, store: bool = False):
    """Re-run the level's recipe on the latest revisions of its inputs: the difference
    per breakpoint and overall in dB; with `store=true` the new level is kept and
    supersedes this one (without it nothing is written)."""
    return levels.rederive_level(session, actor, level_id, store=store)
@router.get("/levels/{level_id}/breakpoints.csv", response_class=Response,
            responses={200: {"content": {"text/csv": {}}}})
def level_breakpoints(
    level_id: int, session: SessionDep, _: ReaderDep,
    digits: Annotated[int, Query(ge=1, le=17, description="Significant figures.")] = 4,
):
    """The level's breakpoint table: `#` lines (level, grade, units, tolerances, hash,
    STALE, caution), a header with units (`freq_hz,asd_g2_hz`, `freq_hz,accel_g`, or the
    sine bands `f_lo_hz,f_hi_hz,quantity,amplitude,unit`), values to `digits` figures."""
    export = documents.level_export(session, level_id)
    return Response(tables.level_export_csv(export, digits), media_type="text/csv; charset=utf-8",
                    headers={"Content-Disposition":
                             f'attachment; filename="{tables.level_file_stem(export)}.csv"'})
