"""Ready JSON responses of the read routes (serialised once, not validated again).

A route that returns a model lets FastAPI validate it against the route's
``response_model`` again (in a worker thread of its own for a sync route: one thread
hop more) before serialising it. The read routes build their models from the planning
schemas themselves, so they return the serialised bytes instead: the same JSON
(pydantic's serialiser, by alias, as FastAPI's ``dump_json`` path writes it), the
``response_model`` still documents the shape in the OpenAPI description.
"""

from __future__ import annotations

from fastapi import Response
from pydantic import BaseModel


def json_response(model: BaseModel, *, etag: str | None = None) -> Response:
    """`model` as ``application/json`` (status 200), with its ETag when given."""
    body = model.__pydantic_serializer__.to_json(model, by_alias=True)
    return Response(content=body, media_type="application/json",
                    headers={"ETag": etag} if etag is not None else None)
