"""Sign-in and sign-out with an API token (the cookie holds a signed session)."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning.errors import NotAuthenticated
from qualplan.web import auth
from qualplan.web.common import Ctx, CtxDep, form_of, problem_page, redirect, render, text

router = APIRouter(include_in_schema=False)


# --- sign-in ---------------------------------------------------------------------------


@router.get("/")
def home(ctx: Ctx = CtxDep) -> Response:
    return redirect(ctx, "/dashboard" if ctx.actor else "/signin")


def _safe_next(value: str) -> str:
    # Only a path of this site: "//host", or a backslash (browsers read it as "/"), leave it.
    ok = value.startswith("/") and not value.startswith("//") and "\\" not in value
    return value if ok and "\n" not in value and "\r" not in value else "/dashboard"


@router.get("/signin")
def signin_page(ctx: Ctx = CtxDep, next: str = "/dashboard") -> Response:
    return render(ctx, "web/signin.html", next=_safe_next(next), error=None)


@router.post("/signin")
async def signin(request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)
    target = _safe_next(text(form, "next", "/dashboard"))
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
    ws = await run_in_threadpool(auth.sign_out, ctx.db, ctx.ws)  # ends it on the server
    ctx.ws, ctx.set_cookie, ctx.actor = ws, True, None
    response = redirect(ctx, "/signin")
    return response
