"""`qualplan user` and `qualplan token`: users, their roles and API tokens."""

from __future__ import annotations

from typing import Annotated

import typer

from qualplan.cli.base import DbOption
from qualplan.cli.common import JsonOption, ProgramOption, _program, group, local_actor, work
from qualplan.cli.output import emit_json, table
from qualplan.planning import (
    access,
)
from qualplan.planning import schemas as s
from qualplan.planning.schemas import (
    ProgramRole,
    Role,
)

user_app = group("user", "Users and their roles.")
token_app = group("token", "API tokens (shown once, stored hashed).")


# --- users and tokens -------------------------------------------------------------------


@user_app.command("add")
def user_add(
    name: str, role: Annotated[Role, typer.Option(help="Role.")] = Role.viewer, db: DbOption = None
) -> None:
    """Add a user with a role (viewer, engineer, approver, admin)."""
    with work(db) as session:
        user = access.create_user(session, local_actor(), name, role)
        typer.echo(f"user {user.name} ({user.role.value}) added")


@user_app.command("list")
def user_list(db: DbOption = None, as_json: JsonOption = False) -> None:
    """List users (admins)."""
    with work(db) as session:
        access.require(local_actor(), Role.admin, "listing users")
        users = [s.UserRead.model_validate(u) for u in access.list_users(session)]
    if as_json:
        emit_json(users)
    else:
        table(["name", "role", "active"], [(u.name, u.role.value, u.active) for u in users])


@user_app.command("set")
def user_set(name: str,
             role: Annotated[Role | None, typer.Option(help="New role.")] = None,
             active: Annotated[bool | None, typer.Option("--active/--inactive",
                               help="Allow or stop the user (and all their tokens).")] = None,
             db: DbOption = None) -> None:
    """Change a user's role, or deactivate / reactivate the user."""
    with work(db) as session:
        user = access.set_user(session, local_actor(), name, role=role, active=active)
        state = "active" if user.active else "inactive"
        typer.echo(f"user {user.name}: {user.role.value}, {state}")


@user_app.command("grant")
def user_grant(
    name: str,
    role: Annotated[ProgramRole, typer.Option(help="Role in the program.")],
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Give NAME a role in a program (an admin, or an approver of the program)."""
    with work(db) as session:
        prog = _program(session, program)
        access.grant(session, local_actor(), name, prog.id, role.value)
        typer.echo(f"user {name} is {role.value} in program {prog.name}")


@user_app.command("revoke")
def user_revoke(name: str, program: ProgramOption = None, db: DbOption = None) -> None:
    """End NAME's membership of a program (an admin, or an approver of the program)."""
    with work(db) as session:
        prog = _program(session, program)
        access.revoke(session, local_actor(), name, prog.id)
        typer.echo(f"user {name} is no longer a member of program {prog.name}")


@user_app.command("members")
def user_members(program: ProgramOption = None, db: DbOption = None,
                 as_json: JsonOption = False) -> None:
    """List the members of a program and their roles."""
    with work(db) as session:
        prog = _program(session, program)
        rows = [s.MemberRead(user=n, role=r.value)
                for n, r in access.members(session, local_actor(), prog.id)]
    if as_json:
        emit_json(rows)
    else:
        table(["user", "role"], [(r.user, r.role.value) for r in rows])


@token_app.command("list")
def token_list(user: str, db: DbOption = None) -> None:
    """List a user's tokens (prefix and dates only; tokens are stored hashed)."""
    with work(db) as session:
        rows = access.list_tokens(session, local_actor(), user)
        table(["prefix", "label", "created (UTC)", "revoked (UTC)"],
              [(t.prefix, t.label, f"{t.created_at:%Y-%m-%d %H:%M}",
                f"{t.revoked_at:%Y-%m-%d %H:%M}" if t.revoked_at else None) for t in rows])


@token_app.command("create")
def token_create(
    user: str, label: Annotated[str, typer.Option(help="What it is for.")] = "", db: DbOption = None
) -> None:
    """Create an API token for USER and print it (the only time it is shown)."""
    with work(db) as session:
        token = access.create_token(session, local_actor(), user, label)
    typer.echo(token)


@token_app.command("revoke")
def token_revoke(
    prefix: Annotated[str, typer.Argument(help="The token's first 10 characters.")],
    db: DbOption = None,
) -> None:
    """Revoke a token."""
    with work(db) as session:
        access.revoke_token(session, local_actor(), prefix)
    typer.echo(f"token {prefix}... revoked")
