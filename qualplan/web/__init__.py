"""Server-rendered pages for engineers (an interface beside the HTTP API).

Thin like every interface: parse the form, call a planning use case with the Actor of
the session cookie, present the result. :func:`mount` adds the pages and their static
files to a FastAPI app whose lifespan provides ``app.state.sessionmaker`` (the API app
does; see ``qualplan.service``).
"""

from __future__ import annotations

from qualplan.web.pages import ROUTERS, mount

__all__ = ["mount", "ROUTERS"]
