"""Request-scoped dependencies: the session (one unit of work), the caller, versions, pages."""

from __future__ import annotations

import re
from collections.abc import Iterator
from typing import Annotated

from fastapi import Depends, Header, Query, Request
from fastapi.concurrency import run_in_threadpool
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer
from fastapi.security.utils import get_authorization_scheme_param
from sqlalchemy.orm import Session

from qualplan.api.errors import Problem
from qualplan.planning import access
from qualplan.planning.access import Actor
from qualplan.planning.errors import NotAuthenticated
from qualplan.planning.schemas import Role
from qualplan.serving import READ_SLOTS, admission, request_session

__all__ = ["READ_SLOTS", "SessionDep", "ActorDep", "ReaderDep", "PageDep", "VersionDep"]

MAX_LIMIT = 500
DEFAULT_LIMIT = 50


def get_session(
    request: Request, _turn: Annotated[None, Depends(admission, scope="function")]
) -> Iterator[Session]:
    """The request's unit of work (qualplan.serving: commit once, roll back on error).

    The caller's bearer token is checked here too, in the thread that opens the session
    (:func:`_authenticate_early`), and :func:`current_actor` only hands the outcome on: a
    sync dependency of its own cost a thread hop per request."""
    yield from request_session(request, on_open=lambda s: _authenticate_early(request, s))


SessionDep = Annotated[Session, Depends(get_session, scope="function")]

bearer = HTTPBearer(
    auto_error=False,
    description="A token from `qualplan token create` or POST /api/v1/users/{name}/tokens.",
)


def _bearer_token(request: Request) -> str | None:
    """The token of ``Authorization: Bearer <token>`` as HTTPBearer reads it, or None."""
    scheme, token = get_authorization_scheme_param(request.headers.get("Authorization"))
    return token if scheme.lower() == "bearer" and token else None


def _authenticate_early(request: Request, session: Session) -> None:
    """Authenticate the bearer token on the request's new session (scoping it to the
    caller's programs); keep the actor, or the refusal for :func:`current_actor` to raise
    (a route that does not ask for the caller never sees it)."""
    token = _bearer_token(request)
    if token is None:
        return
    try:
        actor = access.authenticate(session, token)
    except NotAuthenticated as exc:
        request.state.auth = (token, exc)
        return
    request.state.auth = (token, actor)
    request.state.user = actor.name  # for the request log (api.requestlog)


async def current_actor(
    request: Request,
    session: SessionDep,
    credentials: Annotated[HTTPAuthorizationCredentials | None, Depends(bearer)],
) -> Actor:
    """The caller; NotAuthenticated (401) without a valid, unrevoked token."""
    token = credentials.credentials if credentials else None
    early = getattr(request.state, "auth", None)
    if token is None or early is None or early[0] != token:
        # no token (refused without the database), or a token the session did not see
        actor = await run_in_threadpool(access.authenticate, session, token)
        request.state.user = actor.name
        return actor
    if isinstance(early[1], Exception):
        raise early[1]
    return early[1]


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
