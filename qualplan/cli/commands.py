"""The work commands: programs, products, phases, environments, policies, levels,
requirements, evidence, waivers, audit, users and tokens.

Each command opens one unit of work, calls one planning use case and prints a table
(or JSON with ``--json``). The CLI acts with the rights of a local administrator on
the database it opens (the file's or server's own access rules guard it); set
``QUALPLAN_ACTOR`` to record your name on what you change (default: the login name).
"""

from __future__ import annotations

import getpass
import json
import os
from contextlib import contextmanager
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Annotated, Any

import typer

from qualplan.cli.base import CliError, DbOption, app, checked_engine
from qualplan.cli.output import emit_json, progress, table
from qualplan.planning import (
    access,
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
from qualplan.store.models import (
    Axis,
    EnvironmentKind,
    Grade,
    LevelPurpose,
    Role,
    VerificationMethod,
)
from qualplan.store.session import make_sessionmaker, unit_of_work

JsonOption = Annotated[bool, typer.Option("--json", help="Print JSON instead of a table.")]
ProgramOption = Annotated[str | None, typer.Option("--program", help="Program name or id.")]

user_app = typer.Typer(help="Users and their roles.", no_args_is_help=True)
token_app = typer.Typer(help="API tokens (shown once, stored hashed).", no_args_is_help=True)
program_app = typer.Typer(help="Programs.", no_args_is_help=True)
product_app = typer.Typer(help="Products (system, subsystem, unit).", no_args_is_help=True)
phase_app = typer.Typer(help="Life-cycle phases.", no_args_is_help=True)
env_app = typer.Typer(help="Environments and their revisions.", no_args_is_help=True)
policy_app = typer.Typer(help="Margin policies.", no_args_is_help=True)
level_app = typer.Typer(help="Derived test and analysis levels.", no_args_is_help=True)
req_app = typer.Typer(help="Requirements and their status.", no_args_is_help=True)
evidence_app = typer.Typer(help="Evidence for a requirement.", no_args_is_help=True)
for name, sub in [
    ("user", user_app),
    ("token", token_app),
    ("program", program_app),
    ("product", product_app),
    ("phase", phase_app),
    ("env", env_app),
    ("policy", policy_app),
    ("level", level_app),
    ("req", req_app),
    ("evidence", evidence_app),
]:
    app.add_typer(sub, name=name)


def local_actor() -> Actor:
    name = os.environ.get("QUALPLAN_ACTOR") or _login()
    return Actor(name=name, role=Role.admin)


def _login() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "local"


@contextmanager
def work(db: str | None):
    """One unit of work on a database whose schema matches the code."""
    engine = checked_engine(db)
    try:
        with unit_of_work(make_sessionmaker(engine, write=True)) as session:
            yield session
    finally:
        engine.dispose()


def _program(session, ref: str | None):
    if ref is not None:
        return catalog.program_by_name_or_id(session, ref)
    rows = catalog.list_programs(session)
    if len(rows) != 1:
        raise CliError(f"{len(rows)} programs in the database: say which with --program")
    return rows[0]


def _read_file(path: Path) -> bytes:
    try:
        return path.read_bytes()
    except OSError as exc:
        raise CliError(f"cannot read {path}: {exc.strerror}") from exc


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
    """List users."""
    with work(db) as session:
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
            f"phase {row.name} added (id {row.id}): {row.duration_s:g} s x {row.occurrences}"
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


# --- environments -----------------------------------------------------------------------

FileOption = Annotated[
    Path | None,
    typer.Option("--file", help="Data file (.json, .csv; records: .csv .npy .wav .mat .uff)."),
]
DataOption = Annotated[str | None, typer.Option("--data", help="The data as inline JSON.")]
UnitsOption = Annotated[
    str | None,
    typer.Option("--units", help="Units of the file's values (g^2/Hz, (m/s^2)^2/Hz, g, m/s^2)."),
]
RateOption = Annotated[
    float | None, typer.Option("--sample-rate-hz", help="Sample rate of a one-column record [Hz].")
]


def _data(
    kind: EnvironmentKind,
    file: Path | None,
    data: str | None,
    units: str | None,
    rate: float | None,
):
    if (file is None) == (data is None):
        raise CliError("give the data with exactly one of --file or --data")
    if data is not None:
        try:
            return json.loads(data), None
        except json.JSONDecodeError as exc:
            raise CliError(f"--data is not valid JSON: {exc.msg} at column {exc.colno}") from exc
    return imports.environment_data_from_file(
        kind, file.name, _read_file(file), value_units=units, sample_rate_hz=rate
    )


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
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Add an environment with its first revision."""
    payload, array = _data(kind, file, data, units, sample_rate_hz)
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product)
        phase_id = None
        if phase is not None:
            match = [p for p in catalog.list_phases(session, prog.id) if p.name == phase]
            if not match:
                raise CliError(f"no phase {phase!r} in program {prog.name}")
            phase_id = match[0].id
        env = environments.create_environment(
            session,
            local_actor(),
            s.EnvironmentCreate(
                product_id=prod.id,
                phase_id=phase_id,
                name=name,
                kind=kind,
                axis=axis,
                source=source,
                provenance=provenance,
                data=payload,
                note=note,
            ),
            array,
        )
        summary = environments.history(session, env.id)[-1].summary
    typer.echo(f"environment {name} added (id {env.id}, revision 1): " + _summary_text(summary))


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
    expected_revision: Annotated[
        int | None, typer.Option(help="Refuse if the latest revision is not this one.")
    ] = None,
    db: DbOption = None,
) -> None:
    """Add a new revision to an environment (the old ones are kept)."""
    with work(db) as session:
        from qualplan.planning.catalog import get
        from qualplan.store.models import Environment

        env = get(session, Environment, environment_id, "environment")
        payload, array = _data(env.kind, file, data, units, sample_rate_hz)
        rev = environments.revise_environment(
            session,
            local_actor(),
            environment_id,
            s.RevisionIn(data=payload, note=note, expected_revision=expected_revision),
            array,
        )
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
    """List environments (of one product, or all)."""
    with work(db) as session:
        prod_id = None
        if product is not None:
            prog = _program(session, program) if program else None
            prod_id = catalog.product_ref(session, prog, product).id
        rows = [
            environments.read_environment(session, e)
            for e in environments.list_environments(session, product_id=prod_id)
        ]
    if as_json:
        emit_json(rows)
    else:
        table(
            ["id", "name", "kind", "axis", "units", "latest rev", "product id"],
            [
                (e.id, e.name, e.kind.value, e.axis.value, e.units, e.latest_revision, e.product_id)
                for e in rows
            ],
        )


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
            f"{cmp.max_difference_at_hz:.4g} Hz"
        )
    for note in cmp.notes:
        typer.echo(f"note: {note}")


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


# --- levels -----------------------------------------------------------------------------


@level_app.command("derive")
def level_derive(
    name: str,
    product: Annotated[str, typer.Option(help="Product name or id.")],
    kind: Annotated[str, typer.Option(help="random, sine or shock.")],
    axis: Annotated[Axis, typer.Option(help="Axis.")],
    revisions: Annotated[str, typer.Option(help="Environment revision ids, comma-separated.")],
    policy: Annotated[str, typer.Option(help="Margin policy name or id.")] = "spaceflight-gevs",
    grade: Annotated[Grade, typer.Option(help="Test grade.")] = Grade.qualification,
    purpose: Annotated[LevelPurpose, typer.Option(help="test or analysis.")] = LevelPurpose.test,
    combination: Annotated[str, typer.Option(
        help="envelope, p95_50, or fds_equivalent (random tests: the PSD doing the "
        "inputs' fatigue damage in the test duration).")] = "envelope",
    max_breakpoints: Annotated[int, typer.Option(help="Breakpoints at most.")] = 12,
    load_factor_fn_hz: Annotated[
        float | None,
        typer.Option(help="Natural frequency for the 3-sigma load factor (analysis) [Hz]."),
    ] = None,
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Derive a test or analysis level from environment revisions."""
    try:
        ids = [int(x) for x in revisions.split(",") if x.strip()]
    except ValueError as exc:
        raise CliError(f"--revisions {revisions!r}: give revision ids like 3,4,7") from exc
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product)
        pol = policies.policy_ref(session, policy)
        recipe = s.LevelRecipe(
            product_id=prod.id,
            name=name,
            purpose=purpose,
            grade=grade,
            kind=kind,
            axis=axis,
            revision_ids=ids,
            combination=combination,
            max_breakpoints=max_breakpoints,
            policy_id=pol.id,
            load_factor_fn_hz=load_factor_fn_hz,
        )
        with progress("deriving the level and its FDS/ERS coverage"):
            level = levels.derive_level(session, local_actor(), recipe)
        out = levels.read_level(session, level)
    if as_json:
        emit_json(out)
    else:
        _print_level(out)


def _print_level(level: s.LevelRead) -> None:
    r = level.result
    typer.echo(
        f"level {level.name} #{level.number} (id {level.id}): {level.purpose.value}, "
        f"{level.grade.value if level.grade else ''} {level.kind.value}, axis "
        f"{level.axis.value}, hash {level.level_hash[:12]}"
    )
    if level.kind is EnvironmentKind.random:
        table(["freq [Hz]", "ASD [g^2/Hz]"], zip(r["freq_hz"], r["asd_g2_hz"], strict=True))
        typer.echo(
            f"overall {r['grms']:.3f} g rms"
            + (f", {r['duration_s']:g} s per axis" if "duration_s" in r else "")
        )
    elif level.kind is EnvironmentKind.shock:
        table(["freq [Hz]", "SRS [g]"], zip(r["freq_hz"], r["accel_g"], strict=True))
        typer.echo(
            f"Q {r['q']:g}, tolerance {r['lower_db']:+g}/{r['upper_db']:+g} dB, "
            f"{r['shocks_per_axis']} shocks per axis"
        )
    else:
        table(["freq [Hz]", "amplitude [g peak]"], zip(r["freq_hz"], r["accel_g"], strict=True))
        typer.echo(
            f"{r['sweep_rate_oct_per_min']:g} oct/min {r['direction']}, "
            f"{r['sweeps']} sweep(s), {r['sweep_time_s']:.1f} s"
        )
    cov = r.get("coverage")
    if cov and cov.get("fn_hz"):
        for b, item in cov.get("by_b", {}).items():
            typer.echo(
                f"FDS coverage b = {b}: worst {item['worst_db']:+.2f} dB at "
                f"{item['worst_fn_hz']:.4g} Hz ({'pass' if item['passed'] else 'FAIL'})"
            )
        ers = cov.get("ers")
        if ers:
            typer.echo(
                f"ERS coverage: worst {ers['worst_db']:+.2f} dB at "
                f"{ers['worst_fn_hz']:.4g} Hz ({'pass' if ers['passed'] else 'FAIL'})"
            )
    if "load_factor" in r:
        lf = r["load_factor"]
        typer.echo(
            f"3-sigma load factor at {lf['fn_hz']:g} Hz, Q {lf['q']:g}: "
            f"{lf['three_sigma_g']:.2f} g (Miles {lf['miles_grms']:.2f} g rms)"
        )
    for reason in level.stale_reasons:
        typer.echo(f"STALE: {reason}")


@level_app.command("show")
def level_show(level_id: int, db: DbOption = None, as_json: JsonOption = False) -> None:
    """Show a level, its coverage and whether it is stale."""
    with work(db) as session:
        from qualplan.planning.catalog import get
        from qualplan.store.models import Level

        out = levels.read_level(session, get(session, Level, level_id, "level"))
    if as_json:
        emit_json(out)
    else:
        _print_level(out)


@level_app.command("list")
def level_list(db: DbOption = None, as_json: JsonOption = False) -> None:
    """List levels."""
    with work(db) as session:
        rows = [levels.read_level(session, x) for x in levels.list_levels(session)]
    if as_json:
        emit_json(rows)
    else:
        table(
            ["id", "name", "#", "purpose", "grade", "kind", "axis", "stale"],
            [
                (
                    x.id,
                    x.name,
                    x.number,
                    x.purpose.value,
                    x.grade.value if x.grade else None,
                    x.kind.value,
                    x.axis.value,
                    "yes" if x.stale else "no",
                )
                for x in rows
            ],
        )


# --- requirements, evidence, waivers, audit ---------------------------------------------


@req_app.command("add")
def req_add(
    key: str,
    text: Annotated[str, typer.Option(help="The requirement's text.")],
    product: Annotated[str, typer.Option(help="Product name or id.")],
    method: Annotated[VerificationMethod, typer.Option(help="Verification method.")],
    level: Annotated[int | None, typer.Option(help="Level id it points at.")] = None,
    criterion: Annotated[str, typer.Option(help="Acceptance criterion.")] = "",
    required_margin: Annotated[
        float, typer.Option(help="Margin the evidence must show (MS for analysis, dB for tests).")
    ] = 0.0,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Add a requirement."""
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product)
        req = requirements.create_requirement(
            session,
            local_actor(),
            s.RequirementCreate(
                program_id=prog.id,
                key=key,
                text=text,
                product_id=prod.id,
                level_id=level,
                method=method,
                acceptance_criterion=criterion,
                required_margin=required_margin,
            ),
        )
    typer.echo(f"requirement {req.key} added (id {req.id})")


@req_app.command("list")
def req_list(
    program: ProgramOption = None, db: DbOption = None, as_json: JsonOption = False
) -> None:
    """List requirements with their computed status."""
    with work(db) as session:
        prog = _program(session, program)
        cache: dict[int, list[str]] = {}
        rows = [
            requirements.read_requirement(session, r, level_stale=cache)
            for r in requirements.list_requirements(session, program_id=prog.id)
        ]
    if as_json:
        emit_json(rows)
    else:
        table(
            ["key", "method", "level id", "status", "reason"],
            [(r.key, r.method.value, r.level_id, r.status, r.status_reason) for r in rows],
        )


def _req(session, program: str | None, ref: str):
    prog = _program(session, program) if program else None
    return requirements.requirement_ref(session, prog, ref)


@req_app.command("point")
def req_point(
    requirement: str,
    level: int,
    expected_version: Annotated[int, typer.Option(help="Version you edited.")],
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Point a requirement at another level."""
    with work(db) as session:
        req = _req(session, program, requirement)
        requirements.update_requirement(
            session,
            local_actor(),
            req.id,
            s.RequirementUpdate(level_id=level, expected_version=expected_version),
        )
    typer.echo(f"requirement {requirement} now points at level {level}")


@evidence_app.command("analysis")
def evidence_analysis(
    requirement: str,
    applied: Annotated[float, typer.Option(help="Applied value [units].")],
    allowable: Annotated[float, typer.Option(help="Allowable [units].")],
    units: Annotated[str, typer.Option(help="Units of both values.")],
    factor_of_safety: float = 1.0,
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Record an analysis result; the margin of safety is computed."""
    with work(db) as session:
        req = _req(session, program, requirement)
        ev = evidence.add_analysis(
            session,
            local_actor(),
            req.id,
            s.AnalysisEvidenceIn(
                applied=applied,
                allowable=allowable,
                units=units,
                factor_of_safety=factor_of_safety,
                note=note,
            ),
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}; {ev.summary['reason']}")


@evidence_app.command("test")
def evidence_test(
    requirement: str,
    file: Annotated[
        Path, typer.Option("--file", help="Achieved spectrum: CSV (Hz, value) or JSON.")
    ],
    units: UnitsOption = None,
    duration_s: Annotated[float | None, typer.Option(help="Achieved test duration [s].")] = None,
    shocks: Annotated[int | None, typer.Option(help="Shocks applied.")] = None,
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Record a test record; it is checked against the level's tolerances."""
    with work(db) as session:
        req = _req(session, program, requirement)
        if req.level is None:
            raise CliError(f"requirement {req.key} points at no level")
        ev = evidence.add_test_record_file(
            session,
            local_actor(),
            req.id,
            file.name,
            _read_file(file),
            value_units=units,
            duration_s=duration_s,
            shocks=shocks,
            note=note,
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}; {ev.summary['reason']}")


@evidence_app.command("similarity")
def evidence_similarity(
    requirement: str,
    similar_to: Annotated[str, typer.Option(help="Verified requirement.")],
    rationale: Annotated[str, typer.Option(help="Why it is similar.")],
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Claim similarity to another verified requirement."""
    with work(db) as session:
        req = _req(session, program, requirement)
        other = _req(session, None, similar_to)
        ev = evidence.add_similarity(
            session,
            local_actor(),
            req.id,
            s.SimilarityEvidenceIn(similar_requirement_id=other.id, rationale=rationale),
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}; {ev.summary['reason']}")


@evidence_app.command("inspection")
def evidence_inspection(
    requirement: str,
    note: Annotated[str, typer.Option(help="Finding.")],
    failed: Annotated[bool, typer.Option("--failed", help="The inspection failed.")] = False,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Record an inspection."""
    with work(db) as session:
        req = _req(session, program, requirement)
        ev = evidence.add_inspection(
            session, local_actor(), req.id, s.InspectionEvidenceIn(passed=not failed, note=note)
        )
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}")


@app.command("waive")
def waive(
    requirement: str,
    rationale: Annotated[str, typer.Option(help="Why.")],
    days: Annotated[int, typer.Option(min=1, max=requirements.MAX_WAIVER_DAYS,
                                      help="Days until the waiver expires.")] = 30,
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Waive a requirement (an approver's decision) until it expires."""
    with work(db) as session:
        req = _req(session, program, requirement)
        w = requirements.waive(
            session,
            local_actor(),
            req.id,
            s.WaiverIn(rationale=rationale, expires_at=datetime.now(UTC) + timedelta(days=days)),
        )
    typer.echo(f"requirement {requirement} waived until {w.expires_at:%Y-%m-%d}")


@app.command("audit")
def audit_command(
    program: ProgramOption = None,
    product: Annotated[
        str | None, typer.Option(help="Audit this product and its children only.")
    ] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Margin-closure audit. Exits 0 only when every requirement is verified or waived."""
    with work(db) as session:
        if product is not None and program is None:
            prod = catalog.product_ref(session, None, product)
            prog_id = prod.program_id
        else:
            prog = _program(session, program)
            prog_id = prog.id
            prod = catalog.product_ref(session, prog, product) if product else None
        report = audit.audit(session, prog_id, prod.id if prod else None)
    if as_json:
        emit_json(report)
    else:
        typer.echo(
            f"audit of {report.scope} ({report.program}), {report.generated_at:%Y-%m-%d %H:%M} UTC"
        )
        typer.echo("  ".join(f"{k} {v}" for k, v in report.counts.items()))
        table(
            ["key", "product", "level", "method", "status", "required", "achieved", "reason"],
            [
                (
                    i.key,
                    i.product,
                    i.level,
                    i.method.value,
                    i.status,
                    i.required_margin,
                    i.achieved_margin,
                    i.reason,
                )
                for i in report.items
            ],
        )
        typer.echo(report.verdict)
    if not report.release_ready:
        raise typer.Exit(1)


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
