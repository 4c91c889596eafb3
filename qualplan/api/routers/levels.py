"""Levels: derive from environment revisions, read with the stale flag, list."""

from __future__ import annotations

from fastapi import APIRouter

from qualplan.api.deps import ActorDep, PageDep, ReaderDep, SessionDep
from qualplan.api.models import Page
from qualplan.planning import approvals, levels
from qualplan.planning import schemas as s

router = APIRouter(tags=["levels"])


def _level(session, level_id: int):
    return levels.level_by_id(session, level_id)


@router.post("/levels", status_code=201, response_model=s.LevelRead)
def derive(recipe: s.LevelRecipe, session: SessionDep, actor: ActorDep):
    """Derive a level (the next number of `recipe.name` for the product)."""
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
