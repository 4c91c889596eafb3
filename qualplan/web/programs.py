"""Programs, their product tree and phases, and a product's page (environments per
phase and axis, levels)."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import (
    access,
    catalog,
    environments,
    imports,
    levels,
    policies,
    readiness,
    transfers,
)
from qualplan.planning import schemas as s
from qualplan.planning.schemas import Role
from qualplan.web.common import (
    Ctx,
    CtxDep,
    K,
    _or,
    action,
    form_of,
    number,
    page,
    render,
    text,
)

router = APIRouter(include_in_schema=False)


# --- programs and the product tree ------------------------------------------------------


def programs_page(ctx: Ctx, error: str | None = None, status: int = 200, form=None):
    rows = readiness.all_programs(ctx.db)
    return render(ctx, "web/programs.html", status, programs=catalog.list_programs(ctx.db),
                  readiness={r.program_id: r for r in rows}, statuses=readiness.STATUS_ORDER,
                  error=error, form=form or {})


@router.get("/dashboard")
def dashboard(ctx: Ctx = CtxDep) -> Response:
    """Each program's readiness: counts per status, what blocks release and why, stale
    levels, documents and their revisions."""
    return page(ctx, lambda: render(ctx, "web/dashboard.html",
                                    programs=readiness.all_programs(ctx.db),
                                    statuses=readiness.STATUS_ORDER))


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
    program = catalog.program_by_id(ctx.db, program_id)
    return render(
        ctx, "web/program.html", status, program=program,
        tree=catalog.product_tree(ctx.db, program.id),
        products=catalog.list_products(ctx.db, program.id),
        phases=catalog.list_phases(ctx.db, program.id),
        members=access.members(ctx.db, ctx.actor, program.id),
        roles=[r.value for r in s.ProgramRole],
        can_edit=access.can_in(ctx.db, ctx.actor, program.id, Role.engineer),
        can_manage=access.can_in(ctx.db, ctx.actor, program.id, Role.approver),
        error=error, where=where, form=form or {},
    )


@router.post("/programs/{program_id}/members")
async def grant_member(program_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        access.grant(ctx.db, ctx.actor, text(form, "user"), program_id, text(form, "role"))
        return f"/programs/{program_id}#members"

    return await run_in_threadpool(
        action, ctx, form, do,
        lambda msg, code: program_page(ctx, program_id, msg, code, form, "members"))


@router.post("/programs/{program_id}/members/revoke")
async def revoke_member(program_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        access.revoke(ctx.db, ctx.actor, text(form, "user"), program_id)
        return f"/programs/{program_id}#members"

    return await run_in_threadpool(
        action, ctx, form, do,
        lambda msg, code: program_page(ctx, program_id, msg, code, form, "members"))


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
        ctx, program_id, msg, code, form))


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
    product = catalog.product_by_id(ctx.db, product_id)
    phases = catalog.list_phases(ctx.db, product.program_id)
    envs = environments.list_environments(ctx.db, product_id=product.id)
    rows = []
    for env in envs:
        hist = environments.history(ctx.db, env.id)
        rows.append({"env": env, "latest": hist[-1] if hist else None})
    axes = [a for a in s.Axis if any(r["env"].axis is a for r in rows)]
    by_phase = []
    for ph in [*phases, None]:
        cells = {a: [r for r in rows if r["env"].phase_id == (ph.id if ph else None)
                     and r["env"].axis is a] for a in axes}
        if any(cells.values()):
            by_phase.append({"phase": ph, "cells": cells})
    lv = [levels.read_level(ctx.db, x) for x in levels.list_levels(ctx.db, product.id)]
    origins = transfers.environments_for(ctx.db, product.id)
    return render(
        ctx, "web/product.html", status, product=product, program=product_program(ctx, product),
        phases=phases, rows=rows, axes=axes, by_phase=by_phase, levels=lv,
        policies=policies.list_policies(ctx.db), kinds=list(K), all_axes=list(s.Axis),
        value_units={k.value: sorted(v) for k, v in imports.VALUE_UNITS.items()},
        grades=list(s.Grade), purposes=list(s.LevelPurpose),
        # a specification exists only for a grade with test levels (no error page as .pdf)
        doc_grades=[g for g in s.Grade if any(x.grade is g and x.purpose is
                                              s.LevelPurpose.test for x in lv)],
        origins=origins,
        parent=catalog.product_by_id(ctx.db, product.parent_id) if product.parent_id else None,
        mounting=transfers.read_mounting(ctx.db, product.id) if product.parent_id else None,
        rules=transfers.list_rules(ctx.db, product.program_id),
        # what a transfer may take: the ancestors' environments (no time history)
        parent_envs=[o for o in origins if o.origin in ("inherited", "replaced")
                     and o.kind is not K.time_history],
        error=error, where=where, form=form or {},
    )


def product_program(ctx: Ctx, product):
    return catalog.program_by_id(ctx.db, product.program_id)


@router.get("/products/{product_id}")
def product(product_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: product_page(ctx, product_id))
