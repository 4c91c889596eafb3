"""The whole service: the HTTP API with the web pages mounted on it.

A composition module above the interfaces (import-linter's top layer), so that
``qualplan.api`` and ``qualplan.web`` never import each other. ``qualplan serve``
starts it through uvicorn's import string ``qualplan.service:create_service``.
"""

from __future__ import annotations

from fastapi import FastAPI

from qualplan.api.app import create_app
from qualplan.config import Settings
from qualplan.web import mount


def create_service(settings: Settings | None = None) -> FastAPI:
    """The API app (``/api/v1``) with the web pages at ``/``."""
    settings = settings or Settings()
    app = create_app(settings)
    mount(app, settings, pdf=_pdf_renderer())
    return app


def _pdf_renderer():
    """The reports interface's PDF renderer, or None when it cannot be loaded here."""
    try:
        from qualplan.reports import pdf_bytes
        from qualplan.reports.loads import pdf_bytes as loads_pdf_bytes
    except ImportError:  # the reports interface (or WeasyPrint) is not installed
        return None

    def render(content) -> bytes:
        """Specifications and audits, or an analysis loads package."""
        if getattr(content, "kind", None) == "loads":
            return loads_pdf_bytes(content)
        return pdf_bytes(content)

    return render
