"""`qualplan policy`: margin policies (list, show, copy, edit)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import DbOption
from qualplan.cli.common import JsonOption, _read_file, group, local_actor, work
from qualplan.cli.output import emit_json, table
from qualplan.planning import (
    policies,
)
from qualplan.planning import schemas as s

policy_app = group("policy", "Margin policies.")


# --- policies ---------------------------------------------------------------------------


@policy_app.command("list")
def policy_list(db: DbOption = None, as_json: JsonOption = False) -> None:
    """List margin policies."""
    with work(db) as session:
        policies.ensure_default_policies(session, local_actor())
        rows = [s.PolicyRead.model_validate(p) for p in policies.list_policies(session)]
    if as_json:
        emit_json(rows)
    else:
        table(
            ["id", "name", "version", "description"],
            [(p.id, p.name, p.version, p.description) for p in rows],
        )


@policy_app.command("show")
def policy_show(policy: str, db: DbOption = None) -> None:
    """Print a policy's rules as JSON (edit them and load with `policy edit`)."""
    with work(db) as session:
        policies.ensure_default_policies(session, local_actor())
        emit_json(s.PolicyRead.model_validate(policies.policy_ref(session, policy)))


@policy_app.command("copy")
def policy_copy(policy: str, new_name: str, db: DbOption = None) -> None:
    """Copy a policy under a new name (to edit it)."""
    with work(db) as session:
        policies.ensure_default_policies(session, local_actor())
        src = policies.policy_ref(session, policy)
        row = policies.copy_policy(session, local_actor(), src.id, s.PolicyCopy(name=new_name))
    typer.echo(f"policy {row.name} added (id {row.id}) as a copy of {policy}")


@policy_app.command("edit")
def policy_edit(
    policy: str,
    rules_file: Annotated[
        Path,
        typer.Option(
            "--rules", help="JSON file with the rules (the 'rules' object of `policy show`)."
        ),
    ],
    expected_version: Annotated[int, typer.Option(help="Version you edited.")],
    db: DbOption = None,
) -> None:
    """Replace a policy's rules."""
    rules = s.PolicyRules.model_validate_json(_read_file(rules_file))
    with work(db) as session:
        row = policies.policy_ref(session, policy)
        row = policies.update_policy(
            session, local_actor(), row.id, s.PolicyUpdate(rules=rules), expected_version
        )
    typer.echo(f"policy {row.name} is at version {row.version}")


@policy_app.command("confirm")
def policy_confirm(
    policy: str,
    issue: Annotated[str, typer.Option(
        help="The issue of the standard you checked the values against, e.g. "
        "'GSFC-STD-7000B (2021)'.")],
    expected_version: Annotated[int, typer.Option(help="Version you checked.")],
    note: Annotated[str, typer.Option(help="What was checked.")] = "",
    db: DbOption = None,
) -> None:
    """Record that a policy's values were checked against the issue in force (issued
    documents then say so instead of "values from memory")."""
    with work(db) as session:
        policies.ensure_default_policies(session, local_actor())
        row = policies.policy_ref(session, policy)
        done = policies.confirm_policy(session, local_actor(), row.id, issue, note,
                                       expected_version)
        statement = policies.basis_statement(session, row)
    typer.echo(f"policy {row.name} version {done.policy_version} confirmed: {statement}")
