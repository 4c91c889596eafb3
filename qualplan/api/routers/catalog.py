"""Programs, products (and their tree) and life-cycle phases."""

from __future__ import annotations

from fastapi import APIRouter, Response

from qualplan.api.deps import ActorDep, PageDep, ReaderDep, SessionDep, VersionDep, etag
from qualplan.api.models import Page
from qualplan.api.responses import json_response
from qualplan.planning import access, catalog
from qualplan.planning import schemas as s

router = APIRouter(tags=["programs"])


@router.get("/programs", response_model=Page[s.ProgramRead])
def list_programs(session: SessionDep, _: ReaderDep, page: PageDep):
    rows = catalog.list_programs(session)
    items = [s.ProgramRead.model_validate(r) for r in page.window(rows)]
    return json_response(Page[s.ProgramRead](items=items, total=len(rows),
                                             offset=page.offset, limit=page.limit))


@router.post("/programs", status_code=201, response_model=s.ProgramRead)
def create_program(cmd: s.ProgramCreate, session: SessionDep, actor: ActorDep, response: Response):
    row = catalog.create_program(session, actor, cmd)
    response.headers["ETag"] = etag(row.version)
    return s.ProgramRead.model_validate(row)


@router.get("/programs/{program_id}", response_model=s.ProgramRead)
def get_program(program_id: int, session: SessionDep, _: ReaderDep, response: Response):
    row = catalog.program_by_name_or_id(session, program_id)
    response.headers["ETag"] = etag(row.version)
    return s.ProgramRead.model_validate(row)


@router.patch("/programs/{program_id}", response_model=s.ProgramRead)
def update_program(
    program_id: int,
    cmd: s.ProgramUpdate,
    version: VersionDep,
    session: SessionDep,
    actor: ActorDep,
    response: Response,
):
    row = catalog.update_program(session, actor, program_id, cmd, version)
    response.headers["ETag"] = etag(row.version)
    return s.ProgramRead.model_validate(row)


# --- products -----------------------------------------------------------------------------


@router.post("/products", status_code=201, response_model=s.ProductRead, tags=["products"])
def create_product(cmd: s.ProductCreate, session: SessionDep, actor: ActorDep):
    return s.ProductRead.model_validate(catalog.create_product(session, actor, cmd))


@router.get("/products/{product_id}", response_model=s.ProductRead, tags=["products"])
def get_product(product_id: int, session: SessionDep, _: ReaderDep):
    return s.ProductRead.model_validate(catalog.product_ref(session, None, product_id))


@router.get(
    "/programs/{program_id}/products", response_model=Page[s.ProductRead], tags=["products"]
)
def list_products(program_id: int, session: SessionDep, _: ReaderDep, page: PageDep):
    catalog.program_by_name_or_id(session, program_id)  # 404 for an unknown program
    rows = catalog.list_products(session, program_id)
    items = [s.ProductRead.model_validate(r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.get(
    "/programs/{program_id}/products/tree",
    response_model=list[s.ProductNode],
    tags=["products"],
)
def product_tree(program_id: int, session: SessionDep, _: ReaderDep):
    catalog.program_by_name_or_id(session, program_id)
    return catalog.product_tree(session, program_id)


# --- phases -------------------------------------------------------------------------------


@router.post("/phases", status_code=201, response_model=s.PhaseRead, tags=["phases"])
def create_phase(cmd: s.PhaseCreate, session: SessionDep, actor: ActorDep):
    return s.PhaseRead.model_validate(catalog.create_phase(session, actor, cmd))


@router.get("/programs/{program_id}/phases", response_model=Page[s.PhaseRead], tags=["phases"])
def list_phases(program_id: int, session: SessionDep, _: ReaderDep, page: PageDep):
    catalog.program_by_name_or_id(session, program_id)
    rows = catalog.list_phases(session, program_id)
    items = [s.PhaseRead.model_validate(r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


# --- members ------------------------------------------------------------------------------


@router.get("/programs/{program_id}/members", response_model=list[s.MemberRead],
            tags=["members"])
def list_members(program_id: int, session: SessionDep, actor: ReaderDep):
    """Who holds which role in the program (members of the program and admins)."""
    return [s.MemberRead(user=name, role=role.value)
            for name, role in access.members(session, actor, program_id)]


@router.put("/programs/{program_id}/members/{user_name}", response_model=s.MemberRead,
            tags=["members"])
def grant_member(program_id: int, user_name: str, cmd: s.MemberGrant, session: SessionDep,
                 actor: ActorDep):
    """Give a user a role in the program (an admin or an approver of the program)."""
    row = access.grant(session, actor, user_name, program_id, cmd.role.value)
    return s.MemberRead(user=user_name, role=row.role.value)


@router.delete("/programs/{program_id}/members/{user_name}", status_code=204,
               tags=["members"])
def revoke_member(program_id: int, user_name: str, session: SessionDep, actor: ActorDep):
    """End a user's membership of the program (an admin or an approver of the program)."""
    access.revoke(session, actor, user_name, program_id)
    return Response(status_code=204)
