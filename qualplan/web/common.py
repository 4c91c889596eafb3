"""What every web page module shares: the request context (database session, browser
session, who is signed in), rendering, the sign-in and CSRF checks, form parsing and the
mapping of planning errors to a page.

GET pages need a signed-in user (else a redirect to the sign-in page). Every POST
carries the CSRF token of the session; a POST without it is refused (403) before any
use case runs. Role rules are planning's (PermissionDenied becomes 403); the pages
also hide the forms a role may not use. A refused or invalid form re-renders its page
with the message and stores nothing (the unit of work is rolled back). The statuses are
qualplan.serving's table, the same as the API's.
"""

from __future__ import annotations

import errno
import re
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import Annotated, Any, BinaryIO
from urllib.parse import quote

from fastapi import APIRouter, Depends, Request
from fastapi.responses import RedirectResponse, Response
from fastapi.templating import Jinja2Templates
from pydantic import ValidationError
from sqlalchemy.orm import Session
from starlette.datastructures import FormData, UploadFile

from qualplan import __version__
from qualplan.planning import margins, wording
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import (
    PlanningError,
    StoredDataCorrupt,
    ValidationFailed,
)
from qualplan.planning.inputs import parse_number
from qualplan.resources import data_dir
from qualplan.serving import admission, request_session, status_of
from qualplan.web import auth

STATIC = "/static/web"
templates = Jinja2Templates(directory=str(data_dir("templates")))
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]")


def _visible(value: Any) -> Any:
    """Every text a page shows, with control characters (NUL, escape sequences of a form
    value echoed back) replaced by U+FFFD."""
    if not isinstance(value, str) or not _CONTROL.search(value):
        return value
    return type(value)(_CONTROL.sub("\ufffd", value))  # keeps Markup as Markup


templates.env.finalize = _visible
router = APIRouter(include_in_schema=False)

K = s.EnvironmentKind
Role = s.Role


def _fmt(value: Any, digits: int = 4) -> str:
    """A number for a person: 4 significant digits, no trailing zeros."""
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        return wording.number(value, digits)
    if isinstance(value, list | tuple):
        return "–".join(_fmt(v, digits) for v in value)
    return str(value)


def _unit(text: str) -> str:
    """A unit as printed: g^2/Hz -> g²/Hz."""
    return str(text).replace("^2", "²").replace("^3", "³")


#: Names of the overall measures of planning.envdata.summarise, as shown on the pages.
LABELS = {
    "grms": "overall", "peak_asd": "peak ASD", "peak_srs": "peak SRS", "q": "Q",
    "peak_accel": "peak acceleration", "sweep_time": "sweep time", "band": "band",
    "sample_rate": "sample rate", "rms": "rms", "peak": "peak", "duration": "duration",
}

templates.env.filters["num"] = _fmt
templates.env.filters["verdict_words"] = margins.verdict_words
templates.env.filters["unit"] = _unit
templates.env.filters["status"] = wording.status
templates.env.filters["kind"] = wording.kind
templates.env.filters["hz"] = wording.frequency
templates.env.filters["duration"] = wording.duration
templates.env.filters["db"] = wording.decibels
templates.env.filters["signed"] = wording.signed
templates.env.filters["label"] = lambda key: LABELS.get(key, str(key).replace("_", " "))
templates.env.globals["STATIC"] = STATIC
templates.env.globals["version"] = __version__


#: Renders a planning document content (specification or audit) as PDF bytes. Given to
#: :func:`mount` by the composition module, so the web never imports the reports interface.
PdfRenderer = Callable[[Any], bytes]


@dataclass
class WebState:
    signer: auth.Signer
    secure: bool
    pdf: PdfRenderer | None = None
    #: Largest upload that is not a chunked record [bytes] (QUALPLAN_MAX_UPLOAD_BYTES).
    max_upload_bytes: int = 50 * 1024 * 1024


@dataclass
class Ctx:
    """One request: the database session, the browser session and who is signed in."""

    request: Request
    db: Session
    web: WebState
    ws: auth.WebSession
    actor: Actor | None
    set_cookie: bool = False
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def csrf(self) -> str:
        return self.web.signer.csrf(self.ws)

    def can(self, role: Role) -> bool:
        return self.actor is not None and self.actor.can(role)


def request_session_dep(
    request: Request, _turn: Annotated[None, Depends(admission, scope="function")]
) -> Iterator[Session]:
    yield from request_session(request)


def ctx_dep(
    request: Request, db: Annotated[Session, Depends(request_session_dep, scope="function")]
) -> Ctx:
    """The request's context on the shared unit of work (qualplan.serving): one
    transaction, committed once after the page is built, rolled back on any error."""
    web: WebState = request.app.state.web
    ws = web.signer.load(request.cookies.get(auth.COOKIE))
    fresh = ws is None
    if fresh:
        ws = auth.WebSession.new()
    actor = auth.actor_of(db, ws)
    if actor is None and ws.key:  # ended, revoked or expired: drop it
        ws, fresh = auth.WebSession.new(), True
    return Ctx(request, db, web, ws, actor, set_cookie=fresh)


CtxDep = Depends(ctx_dep)


def _cookie(ctx: Ctx, response: Response) -> Response:
    if ctx.set_cookie:
        response.set_cookie(
            auth.COOKIE,
            ctx.web.signer.dump(ctx.ws),
            max_age=auth.MAX_AGE_S,
            httponly=True,
            samesite="strict",
            secure=ctx.web.secure or ctx.request.url.scheme == "https",
            path="/",
        )
    return response


def render(ctx: Ctx, name: str, status: int = 200, **values) -> Response:
    if ctx.extra.get("error_on_top"):
        values["where"] = None
    values = {
        "can_edit": ctx.can(Role.engineer),  # a page of one program passes its own
        "can_waive": ctx.can(Role.approver),
        **values,
        "pdf_available": ctx.web.pdf is not None,
        "actor": ctx.actor,
        "csrf": ctx.csrf,
    }
    response = templates.TemplateResponse(ctx.request, name, values, status_code=status)
    response.headers["Cache-Control"] = "no-store"
    return _cookie(ctx, response)


def svg_response(svg: str, filename: str) -> Response:
    """A plot as an SVG file (made by reports.charts), shown inline or saved as `filename`."""
    return Response(svg, media_type="image/svg+xml",
                    headers={"Content-Disposition": f'inline; filename="{filename}"',
                             "Cache-Control": "no-store"})


def redirect(ctx: Ctx, url: str) -> Response:
    return _cookie(ctx, RedirectResponse(url, status_code=303))


def problem_page(ctx: Ctx, status: int, title: str, message: str) -> Response:
    return render(ctx, "web/problem.html", status, title=title, message=message)


def message_of(exc: Exception) -> str:
    if isinstance(exc, ValidationError):
        parts = []
        for err in exc.errors()[:3]:
            loc = ".".join(str(x) for x in err["loc"]) or "form"
            value = err.get("input")
            shown = f" = {value!r}" if isinstance(value, str | int | float) else ""
            parts.append(f"{loc}{shown}: {err['msg']}")
        return "; ".join(parts)
    if isinstance(exc, ValidationFailed):
        return f"{exc.field} = {exc.value!r}: {exc.rule}"
    return str(exc)


def status_of_error(exc: PlanningError) -> int:
    """The HTTP status of a planning error: the table the API answers with too."""
    return status_of(exc)[0]


def _os_error(exc: OSError) -> tuple[str, str]:
    """Title and message of a file that could not be written (a full disk named)."""
    if exc.errno == errno.ENOSPC:
        return ("Disk full", "no space left on the service's disk (ENOSPC): nothing was "
                "saved; ask the administrator to free space, then send the form again")
    return ("File error", f"a file could not be written or read "
            f"({exc.strerror or type(exc).__name__}): nothing was saved")


def page(ctx: Ctx, build: Callable[[], Response]) -> Response:
    """A GET page: signed-in users only; planning errors become a problem page."""
    if ctx.actor is None:
        target = ctx.request.url.path
        if ctx.request.url.query:
            target += "?" + ctx.request.url.query
        return redirect(ctx, "/signin?next=" + quote(target, safe=""))
    try:
        return build()
    except PlanningError as exc:
        code, title = status_of(exc)
        return problem_page(ctx, code, title, message_of(exc))
    except StoredDataCorrupt as exc:
        return problem_page(ctx, 500, "Stored data corrupt", str(exc))
    except OSError as exc:
        return problem_page(ctx, 503, *_os_error(exc))


def action(
    ctx: Ctx,
    form: FormData,
    do: Callable[[], str],
    again: Callable[[str, int], Response],
) -> Response:
    """A POST: CSRF and sign-in checked first; `do` returns where to go on success.

    On a planning or input error nothing is stored and `again(message, status)` renders
    the form's page with the message.
    """
    if not ctx.web.signer.csrf_ok(ctx.ws, form.get("csrf")):
        return problem_page(
            ctx, 403, "Form refused",
            "the form's security token is missing or out of date (CSRF check); "
            "reload the page and send the form again",
        )
    if ctx.actor is None:
        return redirect(ctx, "/signin")
    try:
        target = do()
        ctx.db.flush()  # constraint failures surface here; the unit of work commits
    except StoredDataCorrupt as exc:
        ctx.db.rollback()
        return problem_page(ctx, 500, "Stored data corrupt", str(exc))
    except OSError as exc:
        ctx.db.rollback()
        return problem_page(ctx, 503, *_os_error(exc))
    except (PlanningError, ValidationError, ValueError) as exc:
        ctx.db.rollback()
        code = status_of_error(exc) if isinstance(exc, PlanningError) else 422
        if code == 404:
            return problem_page(ctx, 404, "Not found", message_of(exc))
        if code == 403:  # the form may be hidden from this role: say it at the top
            ctx.extra["error_on_top"] = True
        return again(message_of(exc), code)
    return redirect(ctx, target)


async def form_of(request: Request, *, keep_records: bool = False
                  ) -> tuple[FormData, dict[str, tuple[str, bytes]]]:
    """The form fields and the uploaded files as (filename, content).

    With `keep_records`, a form that gives ``channel_axes`` (a long record, stored in
    chunks) keeps its files on disk: read them with :func:`record_file_of`. Any other
    file is held to the ordinary upload limit (ValidationFailed naming the file).
    """
    form = await request.form()
    files: dict[str, tuple[str, bytes]] = {}
    if keep_records and text(form, "channel_axes"):
        return form, files
    limit = request.app.state.web.max_upload_bytes
    for key, value in form.multi_items():
        if isinstance(value, UploadFile):
            if not value.filename and key in files:
                continue  # an empty extra file input
            if value.size is not None and value.size > limit:
                raise ValidationFailed(key, f"{value.filename} ({value.size} bytes)",
                                       f"is larger than the upload limit of {limit} bytes; "
                                       "a long record is stored in chunks when its channel "
                                       "axes are given")
            name, n = key, 1
            while name in files:  # several files in one input: file, file#2, file#3 ...
                n += 1
                name = f"{key}#{n}"
            files[name] = (value.filename or "", await value.read())
    return form, files


def more_files(files: dict[str, tuple[str, bytes]], key: str) -> list[tuple[str, bytes]]:
    """The second and further files of a multiple file input (runs of one condition)."""
    out, n = [], 2
    while f"{key}#{n}" in files:
        out.append(files[f"{key}#{n}"])
        n += 1
    return out


def record_file_of(form: FormData, name: str = "file") -> tuple[str, BinaryIO]:
    """The uploaded record file as (filename, binary stream), spooled on disk by Starlette."""
    value = form.get(name)
    if not isinstance(value, UploadFile) or not value.filename:
        raise ValidationFailed(name, None, "choose the record file to upload")
    return value.filename, value.file


def text(form: FormData, name: str, default: str = "") -> str:
    value = form.get(name)
    return value.strip() if isinstance(value, str) else default


def number(form: FormData, name: str, *, integer: bool = False, required: bool = False):
    raw = text(form, name)
    if raw == "":
        if required:
            raise ValidationFailed(name, None, "is required")
        return None
    return parse_number(name, raw, integer=integer)


def _or(value, default):
    """`default` for an empty field only (a typed 0 stays 0, for the schema to judge)."""
    return default if value is None else value


def csv_response(rows: list[list[Any]], filename: str, comments: list[str] | None = None,
                 *, body: str | None = None) -> Response:
    """A CSV download in the one export format (reports.tables.plain_csv): ``#`` comments
    and the caution, the header (``rows[0]``), values to 4 significant figures."""
    from qualplan.reports import tables

    text = body if body is not None else tables.plain_csv(comments or [], rows[0], rows[1:])
    return Response(
        text,
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{filename}"'},
    )


def _slug(name: str) -> str:
    return "".join(c if c.isalnum() else "-" for c in name).strip("-").lower() or "data"


