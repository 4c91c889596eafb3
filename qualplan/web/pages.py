"""The web pages: one module per aggregate (sign-in, programs and products, environments,
levels, requirements and evidence, documents, a product's modal summaries, estimates and
loads package), mounted here on the service's app.

Each route parses its form, calls planning with the session's Actor and renders what
planning returns (web/common.py holds what they share).
"""

from __future__ import annotations

from fastapi import FastAPI, Request
from fastapi.responses import HTMLResponse
from fastapi.staticfiles import StaticFiles

from qualplan.config import Settings
from qualplan.resources import data_dir
from qualplan.web import (
    analysis,
    auth,
    documents,
    environments,
    jobs,
    levels,
    programs,
    requirements,
    signin,
    transfers,
)
from qualplan.web.common import STATIC, PdfRenderer, WebState

ROUTERS = (signin.router, programs.router, environments.router, levels.router,
           requirements.router, documents.router, analysis.router,
           transfers.router, jobs.router)


def mount(
    app: FastAPI,
    settings: Settings | None = None,
    *,
    secret: bytes | None = None,
    pdf: PdfRenderer | None = None,
) -> None:
    """Add the pages and their static files to `app` (its lifespan makes the sessionmaker).

    `secret` signs the session cookies (default ``QUALPLAN_WEB_SECRET`` or random per
    process); `pdf` renders document contents as PDF (without it the PDF links are hidden).
    """
    settings = settings or Settings()
    app.state.web = WebState(
        signer=auth.Signer(secret or auth.secret_from_settings(settings)),
        secure=bool(getattr(settings, "behind_tls", False)),
        pdf=pdf,
        max_upload_bytes=int(getattr(settings, "max_upload_bytes", 50 * 1024 * 1024)),
    )
    for router in ROUTERS:
        app.include_router(router)
    app.mount(STATIC, StaticFiles(directory=str(data_dir("templates") / "web" / "static")),
              name="web-static")

    @app.middleware("http")
    async def security_headers(request: Request, call_next):
        response = await call_next(request)
        if not request.url.path.startswith("/api/"):
            response.headers.setdefault(
                "Content-Security-Policy",
                "default-src 'self'; img-src 'self' data:; style-src 'self'; "
                "script-src 'self'; frame-ancestors 'none'; form-action 'self'",
            )
            response.headers.setdefault("X-Content-Type-Options", "nosniff")
            response.headers.setdefault("Referrer-Policy", "same-origin")
        return response


__all__ = ["mount", "ROUTERS", "HTMLResponse"]
