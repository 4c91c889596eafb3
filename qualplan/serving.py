"""What the HTTP API and the web pages share: one way into a request and one way out.

- :func:`admission` takes the request's turn before its transaction starts (reads share
  a number of slots; on SQLite writers go one at a time).
- :func:`request_session` is the request's unit of work: it opens the session, commits
  once when the route has returned, and rolls back on any error.
- :data:`STATUS` is the one table from planning errors to HTTP statuses; the API answers
  them as problem+json, the web renders them as a page with the same status.

Both interfaces depend on this module; neither imports the other.
"""

from __future__ import annotations

import uuid
from collections.abc import AsyncIterator, Callable, Iterator
from pathlib import Path

from fastapi import Request
from sqlalchemy.orm import Session

from qualplan.planning import errors as pe
from qualplan.store.session import unit_of_work

SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
#: Reading requests served at once; the rest of the worker threads stay free for writers.
READ_SLOTS = 30

#: Planning error -> (HTTP status, title). The first matching class wins (subclasses first).
STATUS: tuple[tuple[type[pe.PlanningError], int, str], ...] = (
    (pe.NotFound, 404, "Not found"),
    (pe.VersionMismatch, 412, "Precondition failed: edited an older version"),
    (pe.Conflict, 409, "Conflict"),
    (pe.ValidationFailed, 422, "Invalid input"),
    (pe.PermissionDenied, 403, "Forbidden"),
    (pe.NotAuthenticated, 401, "Not authenticated"),
)


def status_of(exc: pe.PlanningError) -> tuple[int, str]:
    """HTTP status and title of a planning error (400 for an error of no known kind)."""
    return next(((code, title) for cls, code, title in STATUS if isinstance(exc, cls)),
                (400, "Bad request"))


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


def request_session(request: Request,
                    on_open: Callable[[Session], None] | None = None) -> Iterator[Session]:
    """One transaction per request: commit once at the end, roll back on any error.

    Used with ``scope="function"`` so the commit happens before the response is sent:
    a failed commit (a concurrent edit, a constraint) becomes the response. `on_open`
    runs on the new session inside the transaction, in the same worker thread (the API
    authenticates there: one thread hop fewer per request).
    """
    state = request.app.state
    maker = state.sessionmaker if request.method in SAFE_METHODS else state.write_sessionmaker
    with unit_of_work(maker) as session:
        if on_open is not None:
            on_open(session)
        yield session


def job_folder(request: Request) -> str:
    """A fresh folder under the serving process's job files folder (``job_files_dir``,
    shared with the workers), for the files of one document job."""
    return str(Path(request.app.state.settings.job_files_dir) / uuid.uuid4().hex)
