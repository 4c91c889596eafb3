"""The FastAPI application factory (composition root of the HTTP interface)."""

from __future__ import annotations

from contextlib import asynccontextmanager

import anyio
from fastapi import FastAPI, Request

from qualplan import __version__
from qualplan.api import errors, metrics
from qualplan.api.deps import READ_SLOTS
from qualplan.api.limits import BodySizeLimit
from qualplan.api.requestlog import RequestLog, install_handler
from qualplan.api.routers import (
    audit,
    catalog,
    documents,
    environments,
    events,
    evidence,
    jobs,
    levels,
    modal,
    policies,
    requirements,
    transfers,
    users,
)
from qualplan.config import Settings
from qualplan.planning.jobs import register_renderers
from qualplan.reports import RENDERERS
from qualplan.store.migrate import check_schema
from qualplan.store.session import make_engine, make_sessionmaker

PREFIX = "/api/v1"
ROUTERS = (
    catalog.router,
    environments.router,
    policies.router,
    levels.router,
    requirements.router,
    evidence.router,
    audit.router,
    documents.router,
    users.router,
    transfers.router,
    events.router,
    modal.router,
    jobs.router,
)


def job_runner(engine, settings: Settings):
    """Jobs in a thread of this process on SQLite, through procrastinate on PostgreSQL."""
    if engine.dialect.name == "sqlite":
        from qualplan.planning.jobs import ThreadRunner

        return ThreadRunner(make_sessionmaker(engine))
    from qualplan.planning.queue import QueueRunner

    return QueueRunner(settings.database_url)


def create_app(settings: Settings | None = None) -> FastAPI:
    """Build the app; the engine is created and the schema checked at start-up."""
    settings = settings or Settings()
    register_renderers(RENDERERS)  # the document jobs of this process's thread runner

    @asynccontextmanager
    async def lifespan(app: FastAPI):
        engine = make_engine(settings.database_url)
        app.state.schema_revision = check_schema(engine)
        app.state.engine = engine
        app.state.sessionmaker = make_sessionmaker(engine)
        app.state.write_sessionmaker = make_sessionmaker(engine, write=True)
        app.state.settings = settings
        app.state.write_lock = anyio.Lock() if engine.dialect.name == "sqlite" else None
        app.state.read_slots = anyio.Semaphore(READ_SLOTS)
        app.state.jobs = job_runner(engine, settings)
        yield
        app.state.jobs.close()
        engine.dispose()

    app = FastAPI(
        title="qualplan",
        version=__version__,
        summary="Environments, test levels, equivalence and margin-closure audit.",
        description="Every route except /health needs `Authorization: Bearer <token>`. "
        "Errors are RFC 9457 problem details (application/problem+json).",
        lifespan=lifespan,
        openapi_url=f"{PREFIX}/openapi.json",
        docs_url=f"{PREFIX}/docs",
        redoc_url=None,
    )
    errors.install(app)
    app.add_middleware(BodySizeLimit, max_bytes=settings.max_upload_bytes,
                       record_max_bytes=settings.max_record_upload_bytes)
    app.add_middleware(RequestLog)  # outermost: logs refused uploads too
    install_handler()

    @app.get(f"{PREFIX}/health", tags=["service"])
    def health(request: Request) -> dict:
        """Package version, the database schema revision and the job queue's readiness."""
        runner = request.app.state.jobs
        return {
            "status": "ok",
            "version": __version__,
            "schema_revision": request.app.state.schema_revision,
            "jobs": {"runner": runner.name, "ready": runner.ready()},
        }

    for router in ROUTERS:
        app.include_router(router, prefix=PREFIX)
    app.include_router(metrics.router, prefix=PREFIX)
    return app
