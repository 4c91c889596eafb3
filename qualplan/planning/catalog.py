"""Programs, the product tree and life phases."""

from __future__ import annotations

import unicodedata

from sqlalchemy import select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, joined, record, require, require_in
from qualplan.planning.errors import Conflict, NotFound, ValidationFailed, VersionMismatch
from qualplan.planning.inputs import MAX_INT
from qualplan.store import models as m
from qualplan.store.repositories import (
    PhaseRepository,
    ProductRepository,
    ProgramRepository,
)


def check_id(id_: int, entity: str) -> int:
    """`id_` when a database row can have it, else NotFound (not an overflow in the
    database driver)."""
    if isinstance(id_, bool) or not isinstance(id_, int) or not 1 <= id_ <= MAX_INT:
        raise NotFound(entity, id_)
    return id_


def get(session: Session, model: type[m.Base], id_: int, entity: str):
    """Row `id_` of `model` or NotFound (an id no database row can have is not found,
    rather than an overflow in the database driver)."""
    row = session.get(model, check_id(id_, entity))
    if row is None:
        raise NotFound(entity, id_)
    return row


def ref_id(ref: str | int) -> int | None:
    """The id a reference names (an int, or ASCII digits), else None (a name)."""
    if isinstance(ref, bool):
        return None
    if isinstance(ref, int):
        return ref
    text = str(ref).strip()
    if text.isascii() and text.isdigit():
        return int(text)
    return None


def name_key(ref: str | int) -> str:
    """A name to look up: a text with a control character (a NUL, which PostgreSQL cannot
    compare, or a line break) is no stored name, so it is not found."""
    text = str(ref)
    if any(unicodedata.category(ch) in ("Cc", "Cs") for ch in text):
        return "\x01"  # a control character no validated name holds: nothing is found
    return text


def check_version(entity: str, row, expected: int | None) -> None:
    if expected is not None and row.version != expected:
        raise VersionMismatch(entity, row.id, expected, row.version)


def _add_unique(session: Session, obj, what: str):
    try:
        with session.begin_nested():
            session.add(obj)
            session.flush()
    except IntegrityError as exc:
        raise Conflict(f"{what} exists already") from exc
    return obj


# --- programs ---------------------------------------------------------------------------


def create_program(session: Session, actor: Actor, cmd: s.ProgramCreate) -> m.Program:
    require(actor, m.Role.engineer, "creating a program")
    program = _add_unique(
        session, m.Program(name=cmd.name, description=cmd.description), f"program {cmd.name!r}"
    )
    joined(session, actor, program.id)
    record(session, actor, "create", "program", program.id, name=cmd.name)
    return program


def program_by_id(session: Session, program_id: int) -> m.Program:
    return get(session, m.Program, program_id, "program")


def product_by_id(session: Session, product_id: int) -> m.Product:
    return get(session, m.Product, product_id, "product")


def list_programs(session: Session) -> list[m.Program]:
    return list(ProgramRepository(session).list())


def program_by_name_or_id(session: Session, ref: str | int) -> m.Program:
    if (rid := ref_id(ref)) is not None:
        return get(session, m.Program, rid, "program")
    row = ProgramRepository(session).by_name(name_key(ref))
    if row is None:
        raise NotFound("program", ref)
    return row


def update_program(
    session: Session,
    actor: Actor,
    program_id: int,
    cmd: s.ProgramUpdate,
    expected_version: int | None,
) -> m.Program:
    program = get(session, m.Program, program_id, "program")
    require_in(session, actor, program.id, m.Role.engineer, "editing a program")
    check_version("program", program, expected_version)
    program.description = cmd.description
    session.flush()
    record(session, actor, "update", "program", program.id)
    return program


# --- products ---------------------------------------------------------------------------


def create_product(session: Session, actor: Actor, cmd: s.ProductCreate) -> m.Product:
    get(session, m.Program, cmd.program_id, "program")
    require_in(session, actor, cmd.program_id, m.Role.engineer, "creating a product")
    if cmd.parent_id is not None:
        parent = get(session, m.Product, cmd.parent_id, "product")
        if parent.program_id != cmd.program_id:
            raise ValidationFailed(
                "parent_id", cmd.parent_id, "the parent product belongs to another program"
            )
    product = _add_unique(session, m.Product(**cmd.model_dump()), f"product {cmd.name!r}")
    record(session, actor, "create", "product", product.id, name=cmd.name)
    return product


def list_products(session: Session, program_id: int) -> list[m.Product]:
    return list(ProductRepository(session).list(program_id=program_id))


def product_tree(session: Session, program_id: int) -> list[s.ProductNode]:
    """The products of a program as a forest (roots first, children by name)."""
    rows = list_products(session, program_id)
    by_parent: dict[int | None, list[m.Product]] = {}
    for row in rows:
        by_parent.setdefault(row.parent_id, []).append(row)

    def node(p: m.Product) -> s.ProductNode:
        kids = sorted(by_parent.get(p.id, []), key=lambda c: c.name)
        return s.ProductNode(
            product=s.ProductRead.model_validate(p), children=[node(c) for c in kids]
        )

    return [node(p) for p in sorted(by_parent.get(None, []), key=lambda c: c.name)]


def product_subtree_ids(session: Session, product_id: int) -> list[int]:
    """The product and all its descendants."""
    get(session, m.Product, product_id, "product")
    return ProductRepository(session).subtree_ids(product_id)


def product_ref(session: Session, program: m.Program | None, ref: str | int) -> m.Product:
    """A product by id, or by name within `program`."""
    if (rid := ref_id(ref)) is not None:
        return get(session, m.Product, rid, "product")
    stmt = select(m.Product).where(m.Product.name == name_key(ref))
    if program is not None:
        stmt = stmt.where(m.Product.program_id == program.id)
    rows = session.scalars(stmt).all()
    if len(rows) != 1:
        raise (
            NotFound("product", ref)
            if not rows
            else Conflict(f"product name {ref!r} is used in several programs; give --program")
        )
    return rows[0]


# --- phases -----------------------------------------------------------------------------


def create_phase(session: Session, actor: Actor, cmd: s.PhaseCreate) -> m.Phase:
    get(session, m.Program, cmd.program_id, "program")
    require_in(session, actor, cmd.program_id, m.Role.engineer, "creating a phase")
    phase = _add_unique(session, m.Phase(**cmd.model_dump()), f"phase {cmd.name!r}")
    record(
        session,
        actor,
        "create",
        "phase",
        phase.id,
        name=cmd.name,
        duration_s=cmd.duration_s,
        occurrences=cmd.occurrences,
    )
    return phase


def list_phases(session: Session, program_id: int) -> list[m.Phase]:
    return list(PhaseRepository(session).list(program_id=program_id))
