"""Routes of the web pages: parse the form, call planning with the session's Actor, render.

GET pages need a signed-in user (else a redirect to the sign-in page). Every POST
carries the CSRF token of the session; a POST without it is refused (403) before any
use case runs. Role rules are planning's (PermissionDenied becomes 403); the pages
also hide the forms a role may not use. A refused or invalid form re-renders its page
with the message and stores nothing (the unit of work is rolled back).
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import AsyncIterator, Callable, Iterator
from dataclasses import dataclass, field
from datetime import UTC, datetime, time
from typing import Any
from urllib.parse import quote

from fastapi import APIRouter, Depends, FastAPI, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates
from pydantic import ValidationError
from sqlalchemy.orm import Session
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import FormData, UploadFile

from qualplan import __version__
from qualplan.config import Settings
from qualplan.planning import (
    audit,
    catalog,
    environments,
    evidence,
    imports,
    levels,
    policies,
    requirements,
)
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import (
    NotAuthenticated,
    NotFound,
    PermissionDenied,
    PlanningError,
    ValidationFailed,
)
from qualplan.planning.inputs import parse_number
from qualplan.resources import data_dir
from qualplan.store import models as m
from qualplan.web import auth, plots

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

K = m.EnvironmentKind
Role = m.Role


def _fmt(value: Any, digits: int = 4) -> str:
    """A number for a person: 4 significant digits, no trailing zeros."""
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        if 1e4 <= abs(value) < 1e9:  # 10000 Hz, not 1e+04 Hz
            return f"{float(f'{value:.{digits}g}'):.0f}"
        return f"{value:.{digits}g}"
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
templates.env.filters["unit"] = _unit
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


async def writer_turn(request: Request) -> AsyncIterator[None]:
    """On SQLite, a POST waits for its turn on the app's write lock (the API's, when the
    app has one): SQLite has one writer, and a transaction that read (the session check)
    and then writes after another writer committed fails instead of waiting."""
    lock = getattr(request.app.state, "write_lock", None)
    if request.method in ("GET", "HEAD") or lock is None:
        yield
        return
    async with lock:
        yield


def ctx_dep(request: Request, _turn: None = Depends(writer_turn)) -> Iterator[Ctx]:
    web: WebState = request.app.state.web
    state = request.app.state
    db = (state.sessionmaker if request.method in ("GET", "HEAD")
          else state.write_sessionmaker)()
    try:
        ws = web.signer.load(request.cookies.get(auth.COOKIE))
        fresh = ws is None
        if fresh:
            ws = auth.WebSession.new()
        actor = auth.actor_of(db, ws)
        if actor is None and ws.token_hash:  # revoked or expired: drop it
            ws, fresh = auth.WebSession.new(), True
        yield Ctx(request, db, web, ws, actor, set_cookie=fresh)
    finally:
        db.rollback()
        db.close()


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
    values.update(
        pdf_available=ctx.web.pdf is not None,
        actor=ctx.actor,
        csrf=ctx.csrf,
        can_edit=ctx.can(Role.engineer),
        can_waive=ctx.can(Role.approver),
    )
    response = templates.TemplateResponse(ctx.request, name, values, status_code=status)
    response.headers["Cache-Control"] = "no-store"
    return _cookie(ctx, response)


def redirect(ctx: Ctx, url: str) -> Response:
    return _cookie(ctx, RedirectResponse(url, status_code=303))


def problem_page(ctx: Ctx, status: int, title: str, message: str) -> Response:
    return render(ctx, "web/problem.html", status, title=title, message=message)


def message_of(exc: Exception) -> str:
    if isinstance(exc, ValidationError):
        parts = []
        for err in exc.errors()[:3]:
            loc = ".".join(str(x) for x in err["loc"]) or "form"
            parts.append(f"{loc}: {err['msg']}")
        return "; ".join(parts)
    if isinstance(exc, ValidationFailed):
        return f"{exc.field} = {exc.value!r}: {exc.rule}"
    return str(exc)


def status_of_error(exc: Exception) -> int:
    if isinstance(exc, PermissionDenied):
        return 403
    if isinstance(exc, NotFound):
        return 404
    if isinstance(exc, NotAuthenticated):
        return 401
    return 400


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
        code = status_of_error(exc)
        title = {403: "Not allowed", 404: "Not found"}.get(code, "Cannot show this page")
        return problem_page(ctx, code, title, message_of(exc))


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
        ctx.db.commit()
    except (PlanningError, ValidationError, ValueError) as exc:
        ctx.db.rollback()
        code = status_of_error(exc) if isinstance(exc, PlanningError) else 400
        if code == 404:
            return problem_page(ctx, 404, "Not found", message_of(exc))
        if code == 403:  # the form may be hidden from this role: say it at the top
            ctx.extra["error_on_top"] = True
        return again(message_of(exc), code)
    return redirect(ctx, target)


async def form_of(request: Request) -> tuple[FormData, dict[str, tuple[str, bytes]]]:
    """The form fields and the uploaded files as (filename, content)."""
    form = await request.form()
    files = {}
    for key, value in form.multi_items():
        if isinstance(value, UploadFile):
            files[key] = (value.filename or "", await value.read())
    return form, files


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


def csv_response(rows: list[list[Any]], filename: str) -> Response:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(rows)
    return Response(
        buf.getvalue(),
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{filename}"'},
    )


def _slug(name: str) -> str:
    return "".join(c if c.isalnum() else "-" for c in name).strip("-").lower() or "data"


# --- sign-in ---------------------------------------------------------------------------


@router.get("/")
def home(ctx: Ctx = CtxDep) -> Response:
    return redirect(ctx, "/programs" if ctx.actor else "/signin")


def _safe_next(value: str) -> str:
    # Only a path of this site: "//host", or a backslash (browsers read it as "/"), leave it.
    ok = value.startswith("/") and not value.startswith("//") and "\\" not in value
    return value if ok and "\n" not in value and "\r" not in value else "/programs"


@router.get("/signin")
def signin_page(ctx: Ctx = CtxDep, next: str = "/programs") -> Response:
    return render(ctx, "web/signin.html", next=_safe_next(next), error=None)


@router.post("/signin")
async def signin(request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)
    target = _safe_next(text(form, "next", "/programs"))
    if not ctx.web.signer.csrf_ok(ctx.ws, form.get("csrf")):
        return problem_page(ctx, 403, "Form refused",
                            "the sign-in form is out of date (CSRF check); reload the page")

    def run() -> Response:
        try:
            _, ws = auth.sign_in(ctx.db, text(form, "token"))
        except NotAuthenticated as exc:
            return render(ctx, "web/signin.html", 401, next=target, error=str(exc))
        ctx.ws, ctx.set_cookie = ws, True
        return redirect(ctx, target)

    return await run_in_threadpool(run)


@router.post("/signout")
async def signout(request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)
    if not ctx.web.signer.csrf_ok(ctx.ws, form.get("csrf")):
        return problem_page(ctx, 403, "Form refused", "reload the page and sign out again")
    ctx.ws, ctx.set_cookie, ctx.actor = auth.WebSession.new(), True, None
    response = redirect(ctx, "/signin")
    return response


# --- programs and the product tree ------------------------------------------------------


def programs_page(ctx: Ctx, error: str | None = None, status: int = 200, form=None):
    return render(ctx, "web/programs.html", status, programs=catalog.list_programs(ctx.db),
                  error=error, form=form or {})


@router.get("/programs")
def programs(ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: programs_page(ctx))


@router.post("/programs")
async def create_program(request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        row = catalog.create_program(ctx.db, ctx.actor, s.ProgramCreate(
            name=text(form, "name"), description=text(form, "description")))
        return f"/programs/{row.id}"

    return await run_in_threadpool(
        action, ctx, form, do, lambda msg, code: programs_page(ctx, msg, code, form))


def program_page(ctx: Ctx, program_id: int, error=None, status=200, form=None, where=None):
    program = catalog.get(ctx.db, m.Program, program_id, "program")
    return render(
        ctx, "web/program.html", status, program=program,
        tree=catalog.product_tree(ctx.db, program.id),
        products=catalog.list_products(ctx.db, program.id),
        phases=catalog.list_phases(ctx.db, program.id),
        error=error, where=where, form=form or {},
    )


@router.get("/programs/{program_id}")
def program(program_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: program_page(ctx, program_id))


@router.post("/programs/{program_id}/products")
async def create_product(program_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        row = catalog.create_product(ctx.db, ctx.actor, s.ProductCreate(
            program_id=program_id, name=text(form, "name"),
            parent_id=number(form, "parent_id", integer=True),
            part_number=text(form, "part_number"), mass_kg=number(form, "mass_kg"),
            description=text(form, "description")))
        return f"/products/{row.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: program_page(
        ctx, program_id, msg, code, form, "product"))


@router.post("/programs/{program_id}/phases")
async def create_phase(program_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        catalog.create_phase(ctx.db, ctx.actor, s.PhaseCreate(
            program_id=program_id, name=text(form, "name"),
            duration_s=number(form, "duration_s", required=True),
            occurrences=_or(number(form, "occurrences", integer=True), 1),
            description=text(form, "description")))
        return f"/programs/{program_id}#phases"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: program_page(
        ctx, program_id, msg, code, form, "phase"))


# --- a product: environments per phase and axis, levels ----------------------------------


def product_page(ctx: Ctx, product_id: int, error=None, status=200, form=None, where=None):
    product = catalog.get(ctx.db, m.Product, product_id, "product")
    phases = catalog.list_phases(ctx.db, product.program_id)
    envs = environments.list_environments(ctx.db, product_id=product.id)
    rows = []
    for env in envs:
        hist = environments.history(ctx.db, env.id)
        rows.append({"env": env, "latest": hist[-1] if hist else None})
    axes = [a for a in m.Axis if any(r["env"].axis is a for r in rows)]
    by_phase = []
    for ph in [*phases, None]:
        cells = {a: [r for r in rows if r["env"].phase_id == (ph.id if ph else None)
                     and r["env"].axis is a] for a in axes}
        if any(cells.values()):
            by_phase.append({"phase": ph, "cells": cells})
    lv = [levels.read_level(ctx.db, x) for x in levels.list_levels(ctx.db, product.id)]
    return render(
        ctx, "web/product.html", status, product=product, program=product_program(ctx, product),
        phases=phases, rows=rows, axes=axes, by_phase=by_phase, levels=lv,
        policies=policies.list_policies(ctx.db), kinds=list(K), all_axes=list(m.Axis),
        value_units={k.value: sorted(v) for k, v in imports.VALUE_UNITS.items()},
        grades=list(m.Grade), purposes=list(m.LevelPurpose),
        error=error, where=where, form=form or {},
    )


def product_program(ctx: Ctx, product) -> m.Program:
    return catalog.get(ctx.db, m.Program, product.program_id, "program")


@router.get("/products/{product_id}")
def product(product_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: product_page(ctx, product_id))


@router.post("/products/{product_id}/environments")
async def upload_environment(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, files = await form_of(request)

    def do() -> str:
        filename, content = files.get("file", ("", b""))
        if not filename:
            raise ValidationFailed("file", None, "choose a file to upload")
        kind = K(text(form, "kind"))
        data, array = imports.environment_data_from_file(
            kind, filename, content,
            value_units=text(form, "value_units") or None,
            freq_units=text(form, "freq_units") or "Hz",
            sample_rate_hz=number(form, "sample_rate_hz"),
        )
        env = environments.create_environment(ctx.db, ctx.actor, s.EnvironmentCreate(
            product_id=product_id, phase_id=number(form, "phase_id", integer=True),
            name=text(form, "name"), kind=kind, axis=m.Axis(text(form, "axis")),
            source=text(form, "source"),
            provenance=text(form, "provenance") or f"uploaded file {filename}",
            data=data, note=text(form, "note")), array)
        return f"/environments/{env.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: product_page(
        ctx, product_id, msg, code, form, "upload"))


@router.post("/products/{product_id}/levels")
async def derive_level(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        ids = [int(v) for v in form.getlist("revision_ids") if str(v).isdigit()]
        recipe = s.LevelRecipe(
            product_id=product_id, name=text(form, "name"),
            purpose=text(form, "purpose") or "test", grade=text(form, "grade") or "qualification",
            kind=text(form, "kind"), axis=text(form, "axis"), revision_ids=ids,
            combination=text(form, "combination") or "envelope",
            max_breakpoints=_or(number(form, "max_breakpoints", integer=True), 12),
            policy_id=number(form, "policy_id", integer=True, required=True),
            load_factor_fn_hz=number(form, "load_factor_fn_hz"),
        )
        level = levels.derive_level(ctx.db, ctx.actor, recipe)
        return f"/levels/{level.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: product_page(
        ctx, product_id, msg, code, form, "derive"))


# --- an environment: plot, history, comparison, new revision -----------------------------


def environment_page(ctx: Ctx, env_id: int, error=None, status=200, form=None):
    env = catalog.get(ctx.db, m.Environment, env_id, "environment")
    hist = environments.history(ctx.db, env.id)
    q = ctx.request.query_params
    comparison, compare_plot, compare_error = None, None, None
    if q.get("a") and q.get("b"):
        try:
            a, b = int(q["a"]), int(q["b"])
            comparison = environments.compare(ctx.db, env.id, a, b)
            pair = [r for r in hist if r.number in (a, b)]
            compare_plot = plots.environment_plot(env, sorted(pair, key=lambda r: r.number))
        except (ValueError, PlanningError) as exc:
            compare_error = message_of(exc)
    product = catalog.get(ctx.db, m.Product, env.product_id, "product")
    return render(
        ctx, "web/environment.html", status, env=env, product=product, history=hist,
        latest=hist[-1] if hist else None, plot=plots.environment_plot(env, hist),
        record_plots=plots.record_plots(env, env.revisions[-1] if env.revisions else None),
        comparison=comparison, compare_plot=compare_plot, compare_error=compare_error,
        value_units=sorted(imports.VALUE_UNITS[env.kind]), error=error, form=form or {},
    )


@router.get("/environments/{env_id}")
def environment(env_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: environment_page(ctx, env_id))


@router.post("/environments/{env_id}/revisions")
async def revise_environment(env_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, files = await form_of(request)

    def do() -> str:
        env = catalog.get(ctx.db, m.Environment, env_id, "environment")
        filename, content = files.get("file", ("", b""))
        if not filename:
            raise ValidationFailed("file", None, "choose a file to upload")
        data, array = imports.environment_data_from_file(
            env.kind, filename, content, value_units=text(form, "value_units") or None,
            freq_units=text(form, "freq_units") or "Hz",
            sample_rate_hz=number(form, "sample_rate_hz"))
        environments.revise_environment(ctx.db, ctx.actor, env.id, s.RevisionIn(
            data=data, note=text(form, "note"),
            expected_revision=number(form, "expected_revision", integer=True)), array)
        return f"/environments/{env.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: environment_page(
        ctx, env_id, msg, code, form))


@router.get("/environments/{env_id}/revisions/{number}.csv")
def revision_csv(env_id: int, number: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        env = catalog.get(ctx.db, m.Environment, env_id, "environment")
        rev = environments.revision(ctx.db, env.id, number)
        xy = plots.revision_xy(env.kind, rev.spec, rev.data)
        if xy is None:
            return problem_page(ctx, 400, "No table", "a time history has no breakpoint table")
        qty, unit = plots.QUANTITY[env.kind]
        rows = [["frequency [Hz]", f"{qty} [{unit}]"], *zip(*xy, strict=True)]
        return csv_response(rows, f"{_slug(env.name)}-r{rev.number}.csv")

    return page(ctx, build)


# --- levels --------------------------------------------------------------------------------


@router.get("/levels/{level_id}")
def level(level_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        row = catalog.get(ctx.db, m.Level, level_id, "level")
        read = levels.read_level(ctx.db, row)
        product = catalog.get(ctx.db, m.Product, row.product_id, "product")
        return render(
            ctx, "web/level.html", level=row, read=read, product=product,
            plot=plots.level_plot(row) if row.kind in plots.QUANTITY else None,
            coverage=plots.coverage_plots(row), worst=plots.worst_margins(row),
            cov=(row.result or {}).get("coverage") or {},
        )

    return page(ctx, build)


@router.get("/levels/{level_id}/breakpoints.csv")
def level_csv(level_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        row = catalog.get(ctx.db, m.Level, level_id, "level")
        qty, unit = plots.QUANTITY[row.kind]
        key = "asd_g2_hz" if row.kind is K.random else "accel_g"
        rows = [["frequency [Hz]", f"{qty} [{unit}]"],
                *zip(row.result["freq_hz"], row.result[key], strict=True)]
        return csv_response(rows, f"{_slug(row.name)}-{row.number}.csv")

    return page(ctx, build)


# --- requirements: the traceability matrix --------------------------------------------------

SORTS = ("key", "product", "level", "method", "status", "evidence")


def matrix_rows(ctx: Ctx, program_id: int) -> list[dict[str, Any]]:
    cache: dict[int, list[str]] = {}
    out = []
    for req in requirements.list_requirements(ctx.db, program_id=program_id):
        read = requirements.read_requirement(ctx.db, req, level_stale=cache)
        ev = req.evidence[-1] if req.evidence else None
        out.append({"req": req, "read": read, "evidence": ev, "product": req.product.name,
                    "level": f"{req.level.name} #{req.level.number}" if req.level else ""})
    return out


def filtered(rows, q) -> list[dict[str, Any]]:
    for key, get in (("status", lambda r: r["read"].status),
                     ("method", lambda r: r["req"].method.value),
                     ("product", lambda r: str(r["req"].product_id))):
        if q.get(key):
            rows = [r for r in rows if get(r) == q[key]]
    if q.get("q"):
        needle = q["q"].lower()
        rows = [r for r in rows if needle in r["req"].key.lower()
                or needle in r["req"].text.lower()]
    sort = q.get("sort") if q.get("sort") in SORTS else "key"
    keyf = {
        "key": lambda r: r["req"].key, "product": lambda r: r["product"],
        "level": lambda r: r["level"], "method": lambda r: r["req"].method.value,
        "status": lambda r: r["read"].status,
        "evidence": lambda r: r["evidence"].created_at.isoformat() if r["evidence"] else "",
    }[sort]
    return sorted(rows, key=keyf, reverse=q.get("dir") == "desc")


def matrix_page(ctx: Ctx, program_id: int, error=None, status=200, form=None):
    program = catalog.get(ctx.db, m.Program, program_id, "program")
    q = ctx.request.query_params
    products = catalog.list_products(ctx.db, program.id)
    all_levels = [lv for p in products for lv in levels.list_levels(ctx.db, p.id)]
    return render(
        ctx, "web/requirements.html", status, program=program,
        rows=filtered(matrix_rows(ctx, program.id), q), q=q, sorts=SORTS,
        statuses=s.Status.__args__, methods=list(m.VerificationMethod), products=products,
        levels=all_levels, error=error, form=form or {},
    )


@router.get("/programs/{program_id}/requirements")
def matrix(program_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: matrix_page(ctx, program_id))


@router.get("/programs/{program_id}/requirements.csv")
def matrix_csv(program_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        program = catalog.get(ctx.db, m.Program, program_id, "program")
        rows = [["key", "requirement", "product", "level", "method", "evidence", "verdict",
                 "status", "reason"]]
        for r in filtered(matrix_rows(ctx, program.id), ctx.request.query_params):
            ev = r["evidence"]
            rows.append([r["req"].key, r["req"].text, r["product"], r["level"],
                         r["req"].method.value, f"{ev.kind.value} {ev.id}" if ev else "",
                         ev.verdict.value if ev else "", r["read"].status,
                         r["read"].status_reason])
        return csv_response(rows, f"{_slug(program.name)}-traceability.csv")

    return page(ctx, build)


@router.post("/programs/{program_id}/requirements")
async def create_requirement(program_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        req = requirements.create_requirement(ctx.db, ctx.actor, s.RequirementCreate(
            program_id=program_id, key=text(form, "key"), text=text(form, "text"),
            product_id=number(form, "product_id", integer=True, required=True),
            level_id=number(form, "level_id", integer=True),
            method=text(form, "method"),
            acceptance_criterion=text(form, "acceptance_criterion"),
            required_margin=number(form, "required_margin") or 0.0))
        return f"/requirements/{req.id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: matrix_page(
        ctx, program_id, msg, code, form))


# --- a requirement: evidence and waivers ------------------------------------------------------


def requirement_page(ctx: Ctx, req_id: int, error=None, status=200, form=None, where=None):
    req = catalog.get(ctx.db, m.Requirement, req_id, "requirement")
    read = requirements.read_requirement(ctx.db, req)
    units = sorted(imports.VALUE_UNITS[req.level.kind]) if req.level else []
    return render(
        ctx, "web/requirement.html", status, req=req, read=read,
        evidence=list(reversed(evidence.list_evidence(ctx.db, req.id))), waivers=req.waivers,
        value_units=units, error=error, where=where, form=form or {},
    )


@router.get("/requirements/{req_id}")
def requirement(req_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: requirement_page(ctx, req_id))


@router.post("/requirements/{req_id}/test-records")
async def add_test_record(req_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, files = await form_of(request)

    def do() -> str:
        filename, content = files.get("file", ("", b""))
        if not filename:
            raise ValidationFailed("file", None, "choose the test record to upload")
        evidence.add_test_record_file(
            ctx.db, ctx.actor, req_id, filename, content,
            value_units=text(form, "value_units") or None,
            duration_s=number(form, "duration_s"),
            shocks=number(form, "shocks", integer=True), note=text(form, "note"))
        return f"/requirements/{req_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: requirement_page(
        ctx, req_id, msg, code, form, "test"))


@router.post("/requirements/{req_id}/analyses")
async def add_analysis(req_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        evidence.add_analysis(ctx.db, ctx.actor, req_id, s.AnalysisEvidenceIn(
            applied=number(form, "applied", required=True),
            allowable=number(form, "allowable", required=True),
            units=text(form, "units"),
            factor_of_safety=_or(number(form, "factor_of_safety"), 1.0),
            note=text(form, "note")))
        return f"/requirements/{req_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: requirement_page(
        ctx, req_id, msg, code, form, "analysis"))


@router.post("/requirements/{req_id}/waivers")
async def waive(req_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        raw = text(form, "expires_on")
        try:
            day = datetime.strptime(raw, "%Y-%m-%d").date()
        except ValueError as exc:
            raise ValidationFailed("expires_on", raw, "give a date as YYYY-MM-DD") from exc
        requirements.waive(ctx.db, ctx.actor, req_id, s.WaiverIn(
            rationale=text(form, "rationale"),
            expires_at=datetime.combine(day, time(23, 59, 59), tzinfo=UTC)))
        return f"/requirements/{req_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: requirement_page(
        ctx, req_id, msg, code, form, "waive"))


# --- the audit ---------------------------------------------------------------------------------


@router.get("/programs/{program_id}/audit")
def audit_page(program_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        product_id = ctx.request.query_params.get("product")
        report = audit.audit(ctx.db, program_id,
                             int(product_id) if product_id and product_id.isdigit() else None)
        program = catalog.get(ctx.db, m.Program, program_id, "program")
        return render(ctx, "web/audit.html", report=report, program=program,
                      products=catalog.list_products(ctx.db, program_id),
                      product_id=product_id or "")

    return page(ctx, build)


@router.get("/programs/{program_id}/audit.csv")
def audit_csv(program_id: int, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        report = audit.audit(ctx.db, program_id)
        rows = [["key", "product", "level", "method", "status", "required margin",
                 "achieved margin", "shortfall", "reason"]]
        for i in report.items:
            rows.append([i.key, i.product, i.level or "", i.method.value, i.status,
                         i.required_margin, "" if i.achieved_margin is None else i.achieved_margin,
                         "" if i.shortfall is None else i.shortfall, i.reason])
        rows.append([])
        rows.append(["verdict", report.verdict])
        return csv_response(rows, f"{_slug(report.program)}-audit.csv")

    return page(ctx, build)


# --- PDF documents (rendered by the renderer the composition module gives) -----------------


def pdf_response(ctx: Ctx, make_content: Callable[[], Any]) -> Response:
    if ctx.web.pdf is None:
        return problem_page(ctx, 404, "No PDF here",
                            "this service was started without the PDF renderer")
    content = make_content()
    name = f"{content.number}-r{content.revision}.pdf"
    return Response(ctx.web.pdf(content), media_type="application/pdf",
                    headers={"Content-Disposition": f'attachment; filename="{name}"',
                             "Cache-Control": "no-store"})


@router.get("/products/{product_id}/specification.pdf")
def specification_pdf(product_id: int, ctx: Ctx = CtxDep, grade: str = "qualification"):
    """The test-level specification of the product for one grade (a preview: issuing it
    is done with ``qualplan`` or the API, which record the revision)."""
    from qualplan.planning import documents

    if grade not in {g.value for g in m.Grade}:
        return page(ctx, lambda: problem_page(ctx, 400, "No such grade", f"grade {grade!r}"))
    return page(ctx, lambda: pdf_response(
        ctx, lambda: documents.specification_content(ctx.db, product_id, grade)))


@router.get("/programs/{program_id}/audit.pdf")
def audit_pdf(program_id: int, ctx: Ctx = CtxDep):
    from qualplan.planning import documents

    return page(ctx, lambda: pdf_response(
        ctx, lambda: documents.audit_content(ctx.db, program_id)))


# --- mounting -----------------------------------------------------------------------------------


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
    )
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


__all__ = ["mount", "router", "HTMLResponse"]
