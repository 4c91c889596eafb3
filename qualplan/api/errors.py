"""Errors as RFC 9457 problem details (``application/problem+json``), mapped in one place.

Every failure the API answers carries ``type``, ``title``, ``status`` and ``detail``;
when the fault lies in one input, ``field`` (a dotted name such as
``data.freq_hz[1]``) and ``value`` name it. Request validation failures list every
fault in ``errors``.
"""

from __future__ import annotations

import errno
import math
from collections.abc import Sequence
from typing import Any

from fastapi import FastAPI, Request
from fastapi.encoders import jsonable_encoder
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from pydantic import ValidationError
from sqlalchemy.exc import DataError, IntegrityError, OperationalError, StatementError
from sqlalchemy.orm.exc import StaleDataError
from starlette.exceptions import HTTPException as StarletteHTTPException

from qualplan.planning import errors as pe
from qualplan.serving import status_of

PROBLEM_JSON = "application/problem+json"
MAX_VALUE_CHARS = 200


class Problem(Exception):
    """An HTTP-level failure that no use case raises (missing If-Match, oversize body)."""

    def __init__(
        self,
        status: int,
        code: str,
        title: str,
        detail: str,
        *,
        field: str | None = None,
        value: Any = None,
        headers: dict[str, str] | None = None,
    ) -> None:
        super().__init__(detail)
        self.status, self.code, self.title, self.detail = status, code, title, detail
        self.field, self.value, self.headers = field, value, headers or {}


def problem_type(code: str) -> str:
    return f"urn:qualplan:problem:{code}"


def _safe_value(value: Any) -> Any:
    """The offending value as JSON; long or odd values become a shortened text."""
    if isinstance(value, float) and not math.isfinite(value):
        return str(value)
    try:
        encoded = jsonable_encoder(value)
    except (TypeError, ValueError):
        encoded = repr(value)
    text = repr(encoded)
    if len(text) > MAX_VALUE_CHARS:
        return text[: MAX_VALUE_CHARS - 3] + "..."
    return _finite(encoded)


def _finite(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return str(value)
    if isinstance(value, list):
        return [_finite(v) for v in value]
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    return value


def problem_response(
    status: int,
    code: str,
    title: str,
    detail: str,
    *,
    field: str | None = None,
    value: Any = None,
    has_value: bool = False,
    headers: dict[str, str] | None = None,
    **extra: Any,
) -> JSONResponse:
    body: dict[str, Any] = {
        "type": problem_type(code),
        "title": title,
        "status": status,
        "detail": detail,
    }
    if field is not None:
        body["field"] = field
        if has_value or value is not None:
            body["value"] = _safe_value(value)
    body.update(extra)
    return JSONResponse(body, status_code=status, headers=headers, media_type=PROBLEM_JSON)


def dotted(loc: Sequence[Any]) -> str:
    """pydantic's ``loc`` as a dotted name: ("body", "data", "freq_hz", 1) -> data.freq_hz[1]."""
    parts = list(loc)
    if parts and parts[0] in ("body", "query", "path", "header", "cookie"):
        parts = parts[1:]
    out = ""
    for p in parts:
        if isinstance(p, int):
            out += f"[{p}]"
        else:
            out += ("." if out else "") + str(p)
    return out or "body"


# --- handlers ---------------------------------------------------------------------------

async def planning_error(_request: Request, exc: pe.PlanningError) -> JSONResponse:
    status, title = status_of(exc)
    headers = {"WWW-Authenticate": "Bearer"} if status == 401 else None
    if isinstance(exc, pe.ValidationFailed):
        return problem_response(
            status,
            exc.code,
            title,
            str(exc),
            field=exc.field,
            value=exc.value,
            has_value=True,
            rule=exc.rule,
        )
    extra: dict[str, Any] = {}
    if isinstance(exc, pe.NotFound):
        extra = {"entity": exc.entity, "key": _safe_value(exc.key)}
    if isinstance(exc, pe.VersionMismatch):
        extra = {"expected_version": exc.expected, "current_version": exc.actual}
    return problem_response(status, exc.code, title, str(exc), headers=headers, **extra)


async def api_problem(_request: Request, exc: Problem) -> JSONResponse:
    return problem_response(
        exc.status,
        exc.code,
        exc.title,
        exc.detail,
        field=exc.field,
        value=exc.value,
        has_value=exc.field is not None,
        headers=exc.headers or None,
    )


async def request_validation(_request: Request, exc: RequestValidationError) -> JSONResponse:
    errors = []
    for err in exc.errors():
        errors.append(
            {
                "field": dotted(err.get("loc", ())),
                "in": (err.get("loc") or ("body",))[0],
                "value": _safe_value(err.get("input")),
                "rule": err.get("msg", ""),
            }
        )
    first = errors[0] if errors else {"field": "body", "value": None, "rule": "invalid"}
    detail = f"{first['field']}: {first['rule']}"
    if len(errors) > 1:
        detail += f" (and {len(errors) - 1} more)"
    return problem_response(
        422,
        "invalid-input",
        "Invalid input",
        detail,
        field=first["field"],
        value=first["value"],
        has_value=True,
        errors=errors,
    )


async def stale_data(_request: Request, exc: StaleDataError) -> JSONResponse:
    return problem_response(
        412,
        "version-mismatch",
        "Precondition failed: edited an older version",
        "someone else changed this record while your edit was being saved; "
        "reload it and apply your change again",
    )


async def integrity(_request: Request, exc: IntegrityError) -> JSONResponse:
    return problem_response(
        409,
        "conflict",
        "Conflict",
        "the change contradicts stored data (a duplicate or a missing reference); "
        "nothing was saved",
    )


async def operational(request: Request, exc: OperationalError) -> JSONResponse:
    text = str(getattr(exc, "orig", exc)).lower()
    if "locked" in text or "could not serialize" in text or "deadlock" in text:
        return problem_response(
            409,
            "concurrent-change",
            "Conflict: concurrent change",
            "another change to the same data was being saved at the same time; "
            "nothing of yours was saved: reload and try again",
            headers={"Retry-After": "1"},
        )
    if "full" in text or "no space" in text:
        return problem_response(
            503, "disk-full", DISK_FULL_TITLE,
            "the database's disk is full (ENOSPC): nothing was saved; free space and try "
            "again", headers={"Retry-After": "60"},
        )
    return problem_response(
        503, "database-unavailable", "Service unavailable",
        f"the database could not be used ({type(getattr(exc, 'orig', exc)).__name__})",
    )


async def data_error(_request: Request, exc: StatementError) -> JSONResponse:
    """A value the database refuses (out of its integer range, a NUL in a text on
    PostgreSQL): bad input, nothing saved."""
    orig = getattr(exc, "orig", exc)
    if not isinstance(exc, DataError) and not isinstance(orig, ValueError | OverflowError):
        return await unexpected(_request, exc)
    return problem_response(
        422, "invalid-input", "Invalid input",
        f"a value does not fit the database ({str(orig).splitlines()[0][:200]}); "
        "nothing was saved",
    )


async def http_error(request: Request, exc: StarletteHTTPException) -> JSONResponse:
    cause = exc.__cause__ or exc.__context__
    if isinstance(cause, OSError):  # the body could not be spooled to disk (FastAPI: 400)
        return await os_error(request, cause)
    titles = {404: "Not found", 405: "Method not allowed", 401: "Not authenticated"}
    code = {404: "not-found", 405: "method-not-allowed"}.get(exc.status_code, "http-error")
    return problem_response(
        exc.status_code,
        code,
        titles.get(exc.status_code, "HTTP error"),
        str(exc.detail),
        headers=getattr(exc, "headers", None),
    )


DISK_FULL_TITLE = "Service unavailable: disk full"


async def os_error(request: Request, exc: OSError) -> JSONResponse:
    """A file the service writes (an upload spooled to disk, a document) could not be
    written: a full disk is named as such; nothing was saved (the request rolled back)."""
    if exc.errno == errno.ENOSPC:
        return problem_response(
            503, "disk-full", DISK_FULL_TITLE,
            "no space left on the service's disk (ENOSPC) while writing a file: nothing was "
            "saved; free space and try again", headers={"Retry-After": "60"},
        )
    return problem_response(
        503, "file-error", "Service unavailable: file error",
        f"a file could not be written or read ({exc.strerror or type(exc).__name__}): "
        "nothing was saved",
    )


async def stored_data_corrupt(_request: Request, exc: pe.StoredDataCorrupt) -> JSONResponse:
    """A stored row that does not match its hash: refuse to serve it, name the row."""
    return problem_response(
        500, "stored-data-corrupt", "Stored data corrupt", str(exc),
        table=exc.table, row_id=exc.row_id,
    )


async def unexpected(_request: Request, exc: Exception) -> JSONResponse:
    return problem_response(
        500,
        "internal-error",
        "Internal server error",
        f"an unexpected {type(exc).__name__}; nothing was saved (the request was rolled back)",
    )


async def model_validation(_request: Request, exc: ValidationError) -> JSONResponse:
    """A command built by a route from form fields refused by its schema: as a request
    validation failure (422 naming the field)."""
    errors = [{"field": dotted(e.get("loc", ())), "in": "body",
               "value": _safe_value(e.get("input")), "rule": e.get("msg", "")}
              for e in exc.errors()]
    first = errors[0] if errors else {"field": "body", "value": None, "rule": "invalid"}
    return problem_response(422, "invalid-input", "Invalid input",
                            f"{first['field']}: {first['rule']}", field=first["field"],
                            value=first["value"], has_value=True, errors=errors)


async def overflow(_request: Request, exc: OverflowError) -> JSONResponse:
    return problem_response(
        422, "invalid-input", "Invalid input",
        f"a number does not fit the database ({exc}); nothing was saved",
    )


def install(app: FastAPI) -> None:
    """Register the handlers on `app`."""
    app.add_exception_handler(pe.PlanningError, planning_error)
    app.add_exception_handler(Problem, api_problem)
    app.add_exception_handler(RequestValidationError, request_validation)
    app.add_exception_handler(StaleDataError, stale_data)
    app.add_exception_handler(IntegrityError, integrity)
    app.add_exception_handler(OperationalError, operational)
    app.add_exception_handler(DataError, data_error)
    app.add_exception_handler(ValidationError, model_validation)
    app.add_exception_handler(OverflowError, overflow)
    app.add_exception_handler(StatementError, data_error)
    app.add_exception_handler(StarletteHTTPException, http_error)
    app.add_exception_handler(pe.StoredDataCorrupt, stored_data_corrupt)
    app.add_exception_handler(OSError, os_error)
    app.add_exception_handler(Exception, unexpected)
