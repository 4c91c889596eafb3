"""The FastAPI application factory (composition root of the HTTP interface)."""

from __future__ import annotations

from contextlib import asynccontextmanager

from fastapi import FastAPI, Request

from qualplan import __version__
from qualplan.config import Settings
from qualplan.store.migrate import check_schema
from qualplan.store.session import make_engine, make_sessionmaker


def create_app(settings: Settings | None = None) -> FastAPI:
    """Build the app; the engine is created and the schema checked at start-up."""
    settings = settings or Settings()

    @asynccontextmanager
    async def lifespan(app: FastAPI):
        engine = make_engine(settings.database_url)
        app.state.schema_revision = check_schema(engine)
        app.state.engine = engine
        app.state.sessionmaker = make_sessionmaker(engine)
        app.state.settings = settings
        yield
        engine.dispose()

    app = FastAPI(
        title="qualplan",
        version=__version__,
        summary="Environments, test levels, equivalence and margin-closure audit.",
        lifespan=lifespan,
    )

    @app.get("/api/v1/health", tags=["service"])
    def health(request: Request) -> dict:
        """Package version and the database schema revision."""
        return {
            "status": "ok",
            "version": __version__,
            "schema_revision": request.app.state.schema_revision,
        }

    return app
