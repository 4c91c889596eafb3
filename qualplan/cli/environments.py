"""`qualplan env`: environments, their revisions, history and comparison."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated, Any

import typer

from qualplan.cli.base import CliError, DbOption
from qualplan.cli.common import (
    JsonOption,
    ProgramOption,
    _program,
    _read_file,
    group,
    local_actor,
    work,
)
from qualplan.cli.output import emit_json, table
from qualplan.planning import (
    approvals,
    catalog,
    environments,
    impact,
    wording,
)
from qualplan.planning import schemas as s
from qualplan.planning.schemas import (
    Axis,
    EnvironmentKind,
)

env_app = group("env", "Environments and their revisions.")


# --- environments -----------------------------------------------------------------------

FileOption = Annotated[
    list[Path] | None,
    typer.Option("--file", help="Data file (.json, .csv; records: .csv .npy .wav .mat .uff); "
                 "repeat for several runs of one condition (one revision, exposure counted "
                 "once)."),
]
DataOption = Annotated[str | None, typer.Option("--data", help="The data as inline JSON.")]
UnitsOption = Annotated[
    str | None,
    typer.Option("--units", help="Units of the file's values (g^2/Hz, (m/s^2)^2/Hz, g, m/s^2)."),
]
RateOption = Annotated[
    float | None, typer.Option("--sample-rate-hz", help="Sample rate of a one-column record [Hz].")
]
ShareOption = Annotated[
    float | None,
    typer.Option("--share", help="Fraction of the phase's time the environment lasts "
                 "(0 < share <= 1; default 1)."),
]
OwnDurationOption = Annotated[
    float | None,
    typer.Option("--duration-s", help="Duration per occurrence of the phase [s] (a spectrum, "
                 "or a record repeated to fill it; default: the phase's time x share)."),
]
CountOption = Annotated[
    int | None,
    typer.Option("--count", help="Shock events per occurrence of the phase (default 1)."),
]


def _reading(units, sample_rate_hz, share, duration_s, count) -> s.FileReading:
    return s.FileReading(value_units=units, sample_rate_hz=sample_rate_hz, share=share,
                         duration_s=duration_s, count=count)


def _json_data(file: list[Path] | None, data: str | None) -> dict[str, Any] | None:
    """The --data JSON, or None when the data come from --file (exactly one is given)."""
    if (not file) == (data is None):
        raise CliError("give the data with exactly one of --file or --data")
    if data is None:
        return None
    try:
        return json.loads(data)
    except json.JSONDecodeError as exc:
        raise CliError(f"--data is not valid JSON: {exc.msg} at column {exc.colno}") from exc


@env_app.command("add")
def env_add(
    name: str,
    product: Annotated[str, typer.Option(help="Product name or id.")],
    kind: Annotated[EnvironmentKind, typer.Option(help="Kind of environment.")],
    axis: Annotated[Axis, typer.Option(help="Axis X, Y, Z or all.")],
    phase: Annotated[str | None, typer.Option(help="Phase name.")] = None,
    source: str = "",
    provenance: str = "",
    note: str = "",
    file: FileOption = None,
    data: DataOption = None,
    units: UnitsOption = None,
    sample_rate_hz: RateOption = None,
    share: ShareOption = None,
    duration_s: OwnDurationOption = None,
    count: CountOption = None,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Add an environment with its first revision."""
    payload = _json_data(file, data)
    if payload is not None:
        payload = environments.with_exposure(payload, share=share, duration_s=duration_s,
                                             count=count)
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product)
        phase_id = None
        if phase is not None:
            match = [p for p in catalog.list_phases(session, prog.id) if p.name == phase]
            if not match:
                raise CliError(f"no phase {phase!r} in program {prog.name}")
            phase_id = match[0].id
        if payload is None:
            env = environments.create_environment_from_file(
                session, local_actor(), s.EnvironmentFromFile(
                    product_id=prod.id, phase_id=phase_id, name=name, kind=kind, axis=axis,
                    source=source, provenance=provenance, note=note,
                    reading=_reading(units, sample_rate_hz, share, duration_s, count)),
                file[0].name, _read_file(file[0]),
                more_files=[(f.name, _read_file(f)) for f in file[1:]])
        else:
            env = environments.create_environment(session, local_actor(), s.EnvironmentCreate(
                product_id=prod.id, phase_id=phase_id, name=name, kind=kind, axis=axis,
                source=source, provenance=provenance, data=payload, note=note))
        summary = environments.history(session, env.id)[-1].summary
        cautions = environments.read_environment(session, env, with_warnings=True).warnings
    typer.echo(f"environment {name} added (id {env.id}, revision 1): " + _summary_text(summary))
    for text in cautions:
        typer.echo(f"warning: {text}", err=True)


SUMMARY_LABELS = {"grms": "overall", "peak_asd": "peak", "peak_srs": "peak SRS",
                  "peak_accel": "peak", "sweep_time": "sweep time", "sample_rate": "sample rate"}


def _summary_text(summary: dict[str, Any]) -> str:
    parts = []
    for key, item in summary.items():
        value = item["value"]
        text = "-".join(f"{v:.4g}" for v in value) if isinstance(value, list) else f"{value:.4g}"
        label = SUMMARY_LABELS.get(key, key.replace("_", " "))
        parts.append(f"{label} {text} {item['unit']}".rstrip())
    return ", ".join(parts)


@env_app.command("revise")
def env_revise(
    environment_id: int,
    note: Annotated[str, typer.Option(help="Why it changed.")],
    file: FileOption = None,
    data: DataOption = None,
    units: UnitsOption = None,
    sample_rate_hz: RateOption = None,
    share: ShareOption = None,
    duration_s: OwnDurationOption = None,
    count: CountOption = None,
    expected_revision: Annotated[
        int | None, typer.Option(help="Refuse if the latest revision is not this one.")
    ] = None,
    db: DbOption = None,
) -> None:
    """Add a new revision to an environment (the old ones are kept)."""
    payload = _json_data(file, data)
    if payload is not None:
        payload = environments.with_exposure(payload, share=share, duration_s=duration_s,
                                             count=count)
    with work(db) as session:
        if payload is None:
            rev = environments.revise_environment_from_file(
                session, local_actor(), environment_id, file[0].name, _read_file(file[0]),
                _reading(units, sample_rate_hz, share, duration_s, count), note=note,
                expected_revision=expected_revision,
                more_files=[(f.name, _read_file(f)) for f in file[1:]])
        else:
            rev = environments.revise_environment(
                session, local_actor(), environment_id,
                s.RevisionIn(data=payload, note=note, expected_revision=expected_revision))
    typer.echo(
        f"environment {environment_id} revision {rev.number} added ({rev.content_hash[:12]})"
    )


@env_app.command("list")
def env_list(
    product: Annotated[str | None, typer.Option(help="Product name or id.")] = None,
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """List environments (all, or those that apply to one product and where they came from)."""
    with work(db) as session:
        prod_id = None
        if product is not None:
            prog = _program(session, program) if program else None
            prod_id = catalog.product_ref(session, prog, product).id
            from qualplan.cli.transfer import print_origins

            return print_origins(session, prod_id, as_json)
        rows = [
            environments.read_environment(session, e)
            for e in environments.list_environments(session, product_id=prod_id)
        ]
    if as_json:
        emit_json(rows)
    else:
        table(
            ["id", "name", "kind", "axis", "units", "latest rev", "product id", "withdrawn"],
            [
                (e.id, e.name, wording.kind(e.kind), e.axis.value, e.units, e.latest_revision,
                 e.product_id, e.withdrawn or "")
                for e in rows
            ],
        )


@env_app.command("impact")
def env_impact(environment_id: int, db: DbOption = None, as_json: JsonOption = False) -> None:
    """What a new revision of an environment would make stale (or, once revised, has
    made stale): levels, requirements and documents."""
    with work(db) as session:
        out = impact.environment_impact(session, environment_id)
    if as_json:
        emit_json(out)
        return
    typer.echo(f"environment {out.environment} (id {out.environment_id}), latest revision "
               f"r{out.latest_revision}")
    typer.echo("levels:")
    table(["id", "level", "purpose", "axis", "through", "uses", "state"],
          [(x.level_id, x.level, x.purpose, x.axis, x.through, f"r{x.revision_used}",
            "stale already" if x.stale_already else "would become stale")
           for x in out.levels])
    typer.echo("requirements:")
    table(["key", "method", "through", "evidence"],
          [(x.key, x.method, x.through, "has evidence" if x.has_evidence else "none yet")
           for x in out.requirements])
    typer.echo("documents:")
    table(["number", "revision", "kind", "through"],
          [(x.number, x.revision, x.kind, x.through) for x in out.documents])
    typer.echo(out.summary)


@env_app.command("withdraw")
def env_withdraw(
    environment_id: int,
    reason: Annotated[str, typer.Option(help="Why it is withdrawn (kept in history).")],
    db: DbOption = None,
) -> None:
    """Withdraw an environment: it leaves the life cycle, the derivations and the default
    baselines; the levels and requirements that used it become stale."""
    with work(db) as session:
        row = approvals.withdraw_environment(session, local_actor(), environment_id, reason)
        env = environments.read_environment(
            session, environments.environment_by_id(session, environment_id))
    typer.echo(f"environment {env.name} (id {env.id}) {env.withdrawn} (withdrawal {row.id})")


@env_app.command("history")
def env_history(environment_id: int, db: DbOption = None, as_json: JsonOption = False) -> None:
    """The revisions of an environment, with their measures."""
    with work(db) as session:
        rows = environments.history(session, environment_id)
    if as_json:
        emit_json(rows)
    else:
        table(
            ["rev", "id", "author", "created (UTC)", "hash", "summary", "note"],
            [
                (
                    r.number,
                    r.id,
                    r.author,
                    f"{r.created_at:%Y-%m-%d %H:%M}",
                    r.content_hash[:12],
                    _summary_text(r.summary),
                    r.note,
                )
                for r in rows
            ],
        )


@env_app.command("compare")
def env_compare(
    environment_id: int, a: int, b: int, db: DbOption = None, as_json: JsonOption = False
) -> None:
    """Compare revisions A and B of an environment."""
    with work(db) as session:
        cmp = environments.compare(session, environment_id, a, b)
    if as_json:
        emit_json(cmp)
        return
    typer.echo(f"revision {a}: {_summary_text(cmp.a_summary)}")
    typer.echo(f"revision {b}: {_summary_text(cmp.b_summary)}")
    if cmp.max_difference_db is not None:
        typer.echo(
            f"largest difference {cmp.max_difference_db:+.2f} dB at "
            f"{wording.frequency(cmp.max_difference_at_hz)}"
        )
    for note in cmp.notes:
        typer.echo(f"note: {note}")
