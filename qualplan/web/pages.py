"""The web pages: one module per aggregate (sign-in, programs and products, environments,
levels, requirements and evidence, documents, a product's modal summaries, estimates and
loads package), mounted here on the service's app.

Each route parses its form, calls planning with the session's Actor and renders what
planning returns (web/common.py holds what they share).
"""

from __future__ import annotations

from fastapi import FastAPI
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

    app.add_middleware(SecurityHeaders)


#: Headers of every page (not of the API): what the pages may load, no sniffing, no
#: referrer to other sites.
PAGE_HEADERS = (
    (b"content-security-policy",
     b"default-src 'self'; img-src 'self' data:; style-src 'self'; "
     b"script-src 'self'; frame-ancestors 'none'; form-action 'self'"),
    (b"x-content-type-options", b"nosniff"),
    (b"referrer-policy", b"same-origin"),
)


class SecurityHeaders:
    """ASGI middleware adding :data:`PAGE_HEADERS` to responses outside ``/api/`` (unless
    the response set them itself). A plain ASGI middleware, not Starlette's
    ``BaseHTTPMiddleware``: that one runs every request, the API's too, through a task
    group and memory streams of its own."""

    def __init__(self, app) -> None:
        self.app = app

    async def __call__(self, scope, receive, send) -> None:
        if scope["type"] != "http" or scope.get("path", "").startswith("/api/"):
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message) -> None:
            if message["type"] == "http.response.start":
                headers = list(message.get("headers", []))
                present = {k.lower() for k, _v in headers}
                headers += [(k, v) for k, v in PAGE_HEADERS if k not in present]
                message = {**message, "headers": headers}
            await send(message)

        await self.app(scope, receive, send_with_headers)


__all__ = ["mount", "ROUTERS", "HTMLResponse"]
