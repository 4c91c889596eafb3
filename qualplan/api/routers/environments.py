"""Environments and their immutable revisions: create, read, list, revise, compare."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Response

from qualplan.api.deps import (
    ActorDep,
    OptionalVersionDep,
    PageDep,
    ReaderDep,
    SessionDep,
    etag,
)
from qualplan.api.errors import Problem
from qualplan.api.models import Page
from qualplan.planning import environments as envs
from qualplan.planning import schemas as s
from qualplan.planning.errors import NotFound

router = APIRouter(tags=["environments"])


def _environment(session, environment_id: int):
    # planning has no "environment by id" use case yet (see the API report); the list
    # filtered here gives the same row and the same NotFound.
    for env in envs.list_environments(session):
        if env.id == environment_id:
            return env
    raise NotFound("environment", environment_id)


def _read(session, env, response: Response | None = None) -> s.EnvironmentRead:
    out = envs.read_environment(session, env)
    if response is not None and out.latest_revision is not None:
        response.headers["ETag"] = etag(out.latest_revision)
    return out


@router.post("/environments", status_code=201, response_model=s.EnvironmentRead)
def create_environment(
    cmd: s.EnvironmentCreate, session: SessionDep, actor: ActorDep, response: Response
):
    """Create an environment with its first revision (the data of `cmd.data`)."""
    return _read(session, envs.create_environment(session, actor, cmd), response)


@router.get("/environments", response_model=Page[s.EnvironmentRead])
def list_environments(
    session: SessionDep,
    _: ReaderDep,
    page: PageDep,
    product_id: int | None = None,
    kind: s.EnvironmentKind | None = None,
    axis: s.Axis | None = None,
):
    rows = envs.list_environments(session, product_id=product_id, kind=kind, axis=axis)
    items = [_read(session, r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.get("/environments/{environment_id}", response_model=s.EnvironmentRead)
def get_environment(environment_id: int, session: SessionDep, _: ReaderDep, response: Response):
    """The environment; its ETag is the number of its latest revision."""
    return _read(session, _environment(session, environment_id), response)


@router.get(
    "/environments/{environment_id}/revisions", response_model=Page[s.RevisionRead]
)
def list_revisions(environment_id: int, session: SessionDep, _: ReaderDep, page: PageDep):
    rows = envs.history(session, environment_id)
    return Page(items=page.window(rows), total=len(rows), offset=page.offset, limit=page.limit)


@router.post(
    "/environments/{environment_id}/revisions", status_code=201, response_model=s.RevisionRead
)
def add_revision(
    environment_id: int,
    cmd: s.RevisionIn,
    session: SessionDep,
    actor: ActorDep,
    version: OptionalVersionDep,
    response: Response,
):
    """Add a revision (the whole data). The revision replaced goes in
    ``expected_revision`` or in If-Match; a newer one in store answers 412."""
    if version is not None:
        if cmd.expected_revision is not None and cmd.expected_revision != version:
            raise Problem(
                422,
                "invalid-input",
                "Invalid input",
                "If-Match and expected_revision name different revisions",
                field="expected_revision",
                value=cmd.expected_revision,
            )
        cmd = cmd.model_copy(update={"expected_revision": version})
    rev = envs.revise_environment(session, actor, environment_id, cmd)
    response.headers["ETag"] = etag(rev.number)
    env = _environment(session, environment_id)
    return envs.read_revision(rev, env.kind)


@router.get("/environments/{environment_id}/compare", response_model=s.RevisionComparison)
def compare(
    environment_id: int,
    session: SessionDep,
    _: ReaderDep,
    a: Annotated[int, Query(ge=1, description="Revision number")],
    b: Annotated[int, Query(ge=1, description="Revision number")],
):
    """Overall measures of revisions `a` and `b` and their largest difference [dB]."""
    return envs.compare(session, environment_id, a, b)
