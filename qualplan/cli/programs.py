"""`qualplan program`, `product` and `phase`: programs, the product tree, life phases."""

from __future__ import annotations

from typing import Annotated

import typer

from qualplan.cli.base import DbOption
from qualplan.cli.common import JsonOption, ProgramOption, _program, group, local_actor, work
from qualplan.cli.output import emit_json, table
from qualplan.planning import (
    catalog,
    policies,
    wording,
)
from qualplan.planning import schemas as s

program_app = group("program", "Programs.")
product_app = group("product", "Products (system, subsystem, unit).")
phase_app = group("phase", "Life-cycle phases.")


# --- programs, products, phases ---------------------------------------------------------


@program_app.command("add")
def program_add(name: str, description: str = "", db: DbOption = None) -> None:
    """Add a program (and the shipped margin policies if missing)."""
    with work(db) as session:
        program = catalog.create_program(
            session, local_actor(), s.ProgramCreate(name=name, description=description)
        )
        policies.ensure_default_policies(session, local_actor())
        typer.echo(f"program {program.name} added (id {program.id})")


@program_app.command("list")
def program_list(db: DbOption = None, as_json: JsonOption = False) -> None:
    """List programs."""
    with work(db) as session:
        rows = [s.ProgramRead.model_validate(p) for p in catalog.list_programs(session)]
    if as_json:
        emit_json(rows)
    else:
        table(["id", "name", "description"], [(p.id, p.name, p.description) for p in rows])


@product_app.command("add")
def product_add(
    name: str,
    program: ProgramOption = None,
    parent: Annotated[str | None, typer.Option(help="Parent product.")] = None,
    part_number: str = "",
    mass_kg: Annotated[float | None, typer.Option(help="Mass [kg].")] = None,
    db: DbOption = None,
) -> None:
    """Add a product, optionally under a parent."""
    with work(db) as session:
        prog = _program(session, program)
        parent_id = catalog.product_ref(session, prog, parent).id if parent else None
        row = catalog.create_product(
            session,
            local_actor(),
            s.ProductCreate(
                program_id=prog.id,
                name=name,
                parent_id=parent_id,
                part_number=part_number,
                mass_kg=mass_kg,
            ),
        )
        typer.echo(f"product {row.name} added (id {row.id})")


@product_app.command("tree")
def product_tree(
    program: ProgramOption = None, db: DbOption = None, as_json: JsonOption = False
) -> None:
    """Show the product tree of a program."""
    with work(db) as session:
        forest = catalog.product_tree(session, _program(session, program).id)
    if as_json:
        emit_json(forest)
        return

    def show(node: s.ProductNode, depth: int) -> None:
        p = node.product
        mass = f", {p.mass_kg:g} kg" if p.mass_kg else ""
        pn = f", {p.part_number}" if p.part_number else ""
        typer.echo(f"{'  ' * depth}{p.name} (id {p.id}{pn}{mass})")
        for child in node.children:
            show(child, depth + 1)

    for root in forest:
        show(root, 0)


@phase_app.command("add")
def phase_add(
    name: str,
    duration_s: Annotated[float, typer.Option(help="Duration of one occurrence [s].")],
    occurrences: Annotated[int, typer.Option(help="Number of occurrences.")] = 1,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Add a life-cycle phase."""
    with work(db) as session:
        prog = _program(session, program)
        row = catalog.create_phase(
            session,
            local_actor(),
            s.PhaseCreate(
                program_id=prog.id,
                name=name,
                duration_s=duration_s,
                occurrences=occurrences,
                position=len(catalog.list_phases(session, prog.id)),
            ),
        )
        typer.echo(
            f"phase {row.name} added (id {row.id}): {wording.duration(row.duration_s)} x "
            f"{row.occurrences}"
        )


@phase_app.command("list")
def phase_list(
    program: ProgramOption = None, db: DbOption = None, as_json: JsonOption = False
) -> None:
    """List the phases of a program."""
    with work(db) as session:
        rows = [
            s.PhaseRead.model_validate(p)
            for p in catalog.list_phases(session, _program(session, program).id)
        ]
    if as_json:
        emit_json(rows)
    else:
        table(
            ["id", "name", "duration [s]", "occurrences"],
            [(p.id, p.name, p.duration_s, p.occurrences) for p in rows],
        )
