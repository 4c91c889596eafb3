"""Request-scoped dependencies: the session (one unit of work), the caller, versions, pages."""

from __future__ import annotations

import re
from collections.abc import AsyncIterator, Iterator
from typing import Annotated

from fastapi import Depends, Header, Query, Request
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer
from sqlalchemy.orm import Session

from qualplan.api.errors import Problem
from qualplan.planning import access
from qualplan.planning.access import Actor
from qualplan.planning.schemas import Role
from qualplan.store.session import unit_of_work

MAX_LIMIT = 500
DEFAULT_LIMIT = 50


SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
#: Reading requests served at once; the rest of the worker threads stay free for writers.
READ_SLOTS = 30


async def admission(request: Request) -> AsyncIterator[None]:
    """Take a turn before the request's transaction starts (waiting costs no thread).

    - Reads hold one of READ_SLOTS, so that readers never occupy every worker thread
      and a writer's steps (session, route, commit) never queue behind fifty reads.
    - On SQLite, writers take turns: SQLite has one writer, and a deferred transaction
      that has read (the token check) and then writes after another writer committed
      fails with "database is locked" (SQLITE_BUSY_SNAPSHOT) instead of waiting.
      PostgreSQL needs no turn.
    """
    state = request.app.state
    if request.method in SAFE_METHODS:
        slots = getattr(state, "read_slots", None)
        if slots is None:
            yield
            return
        async with slots:
            yield
        return
    lock = getattr(state, "write_lock", None)
    if lock is None:
        yield
        return
    async with lock:
        yield


def get_session(
    request: Request, _turn: Annotated[None, Depends(admission, scope="function")]
) -> Iterator[Session]:
    """One transaction per request: commit once at the end, roll back on any error.

    Used with ``scope="function"`` so the commit happens before the response is sent:
    a failed commit (a concurrent edit, a constraint) becomes the response.
    """
    state = request.app.state
    maker = state.sessionmaker if request.method in SAFE_METHODS else state.write_sessionmaker
    with unit_of_work(maker) as session:
        yield session


SessionDep = Annotated[Session, Depends(get_session, scope="function")]

bearer = HTTPBearer(
    auto_error=False,
    description="A token from `qualplan token create` or POST /api/v1/users/{name}/tokens.",
)


def current_actor(
    request: Request,
    session: SessionDep,
    credentials: Annotated[HTTPAuthorizationCredentials | None, Depends(bearer)],
) -> Actor:
    """The caller; NotAuthenticated (401) without a valid, unrevoked token."""
    actor = access.authenticate(session, credentials.credentials if credentials else None)
    request.state.user = actor.name  # for the request log (api.requestlog)
    return actor


ActorDep = Annotated[Actor, Depends(current_actor)]


async def reader(actor: ActorDep) -> Actor:
    """A caller allowed to read (viewer or higher)."""
    access.require(actor, Role.viewer, "reading")
    return actor


ReaderDep = Annotated[Actor, Depends(reader)]

_ETAG = re.compile(r'^\s*(?:W/)?"?(\d+)"?\s*$')


def parse_version(value: str) -> int:
    if value.strip() == "*":
        raise Problem(
            428,
            "precondition-required",
            "Precondition required",
            'If-Match: * would overwrite whatever is stored; give the ETag you edited, e.g. "3"',
            field="If-Match",
            value=value,
        )
    match = _ETAG.match(value)
    if match is None:
        raise Problem(
            412,
            "version-mismatch",
            "Precondition failed",
            'If-Match must carry the ETag of the version you edited, e.g. "3"',
            field="If-Match",
            value=value,
        )
    return int(match.group(1))


def required_version(
    if_match: Annotated[
        str | None,
        Header(
            alias="If-Match",
            description='ETag of the version the edit was made from, e.g. "3" (from GET)',
        ),
    ] = None,
) -> int:
    """The version from If-Match; 428 when the header is missing."""
    if if_match is None:
        raise Problem(
            428,
            "precondition-required",
            "Precondition required",
            "edits need an If-Match header with the ETag from GET, so that two people "
            "editing the same record never silently overwrite each other",
            field="If-Match",
            value=None,
        )
    return parse_version(if_match)


def optional_version(
    if_match: Annotated[str | None, Header(alias="If-Match")] = None,
) -> int | None:
    return None if if_match is None else parse_version(if_match)


VersionDep = Annotated[int, Depends(required_version)]
OptionalVersionDep = Annotated[int | None, Depends(optional_version)]


class PageParams:
    def __init__(
        self,
        offset: Annotated[int, Query(ge=0, description="Items to skip")] = 0,
        limit: Annotated[
            int, Query(ge=1, le=MAX_LIMIT, description=f"Items per page (max {MAX_LIMIT})")
        ] = DEFAULT_LIMIT,
    ) -> None:
        self.offset, self.limit = offset, limit

    def window(self, items):
        return list(items)[self.offset : self.offset + self.limit]


PageDep = Annotated[PageParams, Depends()]


def etag(version: int) -> str:
    return f'"{version}"'
