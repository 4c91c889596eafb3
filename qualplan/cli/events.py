"""`qualplan events`: the append-only event log, newest first."""

from __future__ import annotations

import json
from typing import Annotated

import typer

from qualplan.cli.base import DbOption, app
from qualplan.cli.common import JsonOption, work
from qualplan.cli.output import emit_json, table
from qualplan.planning import (
    access,
)


@app.command("events")
def events_command(
    entity: Annotated[str | None, typer.Option(help="Only this kind (requirement, level, ...).")]
    = None,
    entity_id: Annotated[int | None, typer.Option("--id", help="Only this id.")] = None,
    limit: Annotated[int, typer.Option(help="Newest events shown.")] = 50,
    db: DbOption = None, as_json: JsonOption = False,
) -> None:
    """The event log, newest first: who did what, when (append-only)."""
    with work(db) as session:
        rows, total = access.list_events(session, entity=entity, entity_id=entity_id,
                                         limit=limit)
        items = [{"at": e.at.isoformat(), "actor": e.actor, "action": e.action,
                  "entity": e.entity, "entity_id": e.entity_id, "detail": e.detail}
                 for e in rows]
    if as_json:
        emit_json({"items": items, "total": total})
        return
    table(["at (UTC)", "actor", "action", "entity", "id", "detail"],
          [(i["at"][:19].replace("T", " "), i["actor"], i["action"], i["entity"],
            i["entity_id"], json.dumps(i["detail"], sort_keys=True)[:70]) for i in items])
    typer.echo(f"{len(items)} of {total} events")
