"""``qualplan transfer``: environments down the product tree.

A unit's mounting in its parent (``transfer mount``), transfer rules with their
revisions (``transfer rule-add``, ``rule-revise``, ``rules``), transferred
environments (``transfer derive``), a force limit with its predicted notches
(``transfer force-limit``) and response-limit notching of a test level (``transfer
notch``, ``accept-notching``). ``qualplan env list --product X`` shows where each
environment of X came from.
"""

from __future__ import annotations

import csv
import enum
import io
import json
from pathlib import Path
from typing import Annotated

import typer
from pydantic import ValidationError

from qualplan.cli.base import CliError, DbOption, app
from qualplan.cli.common import JsonOption, ProgramOption, _program, local_actor, work
from qualplan.cli.output import emit_json, table
from qualplan.planning import catalog, notching, transfers
from qualplan.planning.schemas import Axis

transfer_app = typer.Typer(help="Environments down the product tree: mountings, transfer "
                           "rules, transferred environments, force limits.",
                           no_args_is_help=True)
app.add_typer(transfer_app, name="transfer")

class RuleKind(enum.StrEnum):
    zone_transmissibility = "zone_transmissibility"
    mass_attenuation = "mass_attenuation"


class Basis(enum.StrEnum):
    test = "test"
    analysis = "analysis"
    handbook = "handbook"


def _command(model, **fields):
    """Build a planning command; a field pydantic refuses becomes one line (exit 2)."""
    try:
        return model(**fields)
    except ValidationError as exc:
        err = exc.errors()[0]
        where = ".".join(str(x) for x in err["loc"])
        raise CliError(f"{where}={err.get('input')!r}: {err['msg']}") from exc


ProductOption = Annotated[str, typer.Option("--product", help="Product name or id.")]


def print_origins(session, product_id: int, as_json: bool) -> None:
    """The environments that apply to a product and their origin (used by env list)."""
    rows = transfers.environments_for(session, product_id)
    if as_json:
        emit_json(rows)
        return
    table(
        ["id", "name", "kind", "axis", "units", "latest rev", "origin", "from", "through",
         "state"],
        [(r.id, r.name, r.kind.value, r.axis.value, r.units, r.latest_revision, r.origin,
          r.from_product, ", ".join(r.through) or "-",
          "stale" if r.stale else ("note" if r.notes else "current")) for r in rows],
    )
    for r in rows:
        for reason in r.stale_reasons:
            typer.echo(f"  {r.name}: stale: {reason}")
        for note in r.notes:
            typer.echo(f"  {r.name}: {note}")


def _json(option: str, text: str):
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise CliError(f"{option} is not valid JSON: {exc.msg} at column {exc.colno}") from exc


def _axes(text: str) -> dict[str, str]:
    out = {}
    for part in text.split(","):
        if "=" not in part:
            raise CliError(f"--axes {text!r}: write each axis as CHILD=PARENT, e.g. X=-Z,Y=X,Z=-Y")
        k, v = part.split("=", 1)
        out[k.strip().upper()] = v.strip().upper()
    return out


@transfer_app.command("mount")
def mount(
    product: ProductOption,
    axes: Annotated[str | None, typer.Option(
        help="Signed axis permutation, product axis = parent axis: X=-Z,Y=X,Z=-Y.")] = None,
    matrix: Annotated[str | None, typer.Option(
        help="Direction cosines as JSON [[..],[..],[..]] (rows: product X, Y, Z on the "
             "parent's X, Y, Z).")] = None,
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """State a product's orientation in its parent."""
    cmd = _command(transfers.MountingIn, axes=_axes(axes) if axes else None,
                   matrix=_json("--matrix", matrix) if matrix else None, note=note)
    with work(db) as session:
        prog = _program(session, program) if program else None
        prod = catalog.product_ref(session, prog, product)
        row = transfers.set_mounting(session, local_actor(), prod.id, cmd)
        frame = row.frame
    text = (", ".join(f"{k} = parent {v}" for k, v in frame["axes"].items()) if frame["axes"]
            else f"direction cosines {frame['matrix']}")
    typer.echo(f"{prod.name} mounted: {text}")


@transfer_app.command("rule-add")
def rule_add(
    name: str,
    kind: Annotated[RuleKind, typer.Option(help="Kind of rule.")],
    data: Annotated[str, typer.Option(help='JSON: {"freq_hz": [...], "gain": [...]} (|T| in '
                                      'g/g) or {"method": "gevs"} or {"method": '
                                      '"mass_loading", "mounting_mass_kg": 16}.')],
    basis: Annotated[Basis, typer.Option(help="How the numbers were obtained.")],
    provenance: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Add a transfer rule with its first revision."""
    with work(db) as session:
        prog = _program(session, program)
        rule = transfers.create_rule(session, local_actor(), _command(
            transfers.RuleCreate, program_id=prog.id, name=name, kind=kind.value,
            spec=_json("--data", data), basis=basis.value, provenance=provenance))
        rid = rule.id
    typer.echo(f"transfer rule {name} added (id {rid}, revision 1)")


@transfer_app.command("rule-revise")
def rule_revise(
    rule_id: int,
    data: Annotated[str, typer.Option(help="JSON of the rule (as for rule-add).")],
    basis: Annotated[Basis, typer.Option(help="How the numbers were obtained.")],
    note: Annotated[str, typer.Option(help="Why it changed.")],
    provenance: str = "",
    db: DbOption = None,
) -> None:
    """Add a revision to a transfer rule (environments transferred through it go stale)."""
    with work(db) as session:
        rev = transfers.revise_rule(session, local_actor(), rule_id, _command(
            transfers.RuleRevisionIn, spec=_json("--data", data), basis=basis.value,
            provenance=provenance, note=note))
        number = rev.number
    typer.echo(f"transfer rule {rule_id} revision {number} added")


@transfer_app.command("rules")
def rules(program: ProgramOption = None, db: DbOption = None, as_json: JsonOption = False
          ) -> None:
    """List the transfer rules of a program."""
    with work(db) as session:
        rows = transfers.list_rules(session, _program(session, program).id)
    if as_json:
        emit_json(rows)
        return
    table(["id", "name", "kind", "rev", "basis", "provenance"],
          [(r.id, r.name, r.kind, r.revision, r.basis, r.provenance or "-") for r in rows])


@transfer_app.command("derive")
def derive(
    name: str,
    product: ProductOption,
    axis: Annotated[Axis, typer.Option(help="The product's axis X, Y, Z (or all).")],
    from_: Annotated[str, typer.Option("--from", help="Parent environment ids, comma-"
                                       "separated (one per parent axis, or one 'all').")],
    rules: Annotated[str, typer.Option(help="Transfer rule ids in order, comma-separated.")] = "",
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Derive (or re-derive) a transferred environment of a product from its parent's."""
    try:
        parents = [int(x) for x in from_.split(",") if x.strip()]
        rule_ids = [int(x) for x in rules.split(",") if x.strip()]
    except ValueError as exc:
        raise CliError(f"--from {from_!r} / --rules {rules!r}: ids are whole numbers") from exc
    with work(db) as session:
        prog = _program(session, program) if program else None
        prod = catalog.product_ref(session, prog, product)
        rev = transfers.derive_transferred(session, local_actor(), _command(
            transfers.TransferCreate, product_id=prod.id, name=name, axis=axis,
            parent_environment_ids=parents, rule_ids=rule_ids, note=note))
        env_id, number, text = rev.environment_id, rev.number, rev.note
    typer.echo(f"environment {name} of {prod.name}: revision {number} (id {env_id}), {text}")


@transfer_app.command("force-limit")
def force_limit(
    environment: Annotated[int | None, typer.Option(
        help="Random environment id whose latest revision is the input ASD (computed, not "
             "stored).")] = None,
    level: Annotated[int | None, typer.Option(
        help="Random test level id: the force limit is stored with the level and printed "
             "in its specification and CSV.")] = None,
    mass_kg: Annotated[float, typer.Option(help="Total mass M0 of the test item [kg].")] = 0.0,
    c2: Annotated[float, typer.Option(help="Semi-empirical constant C^2 [unitless].")] = 0.0,
    f0_hz: Annotated[float, typer.Option(help="Break frequency: the item's fundamental on its "
                                         "mounting [Hz].")] = 0.0,
    rolloff: Annotated[float, typer.Option(help="Roll-off exponent n of (f0/f)^n above f0.")
                       ] = 2.0,
    modes: Annotated[str, typer.Option(help="Modes fn:effective mass:Q, comma-separated, "
                                       "e.g. 120:6:10,400:2:15 [Hz:kg:-].")] = "",
    residual_kg: Annotated[float, typer.Option(help="Residual mass outside the modes [kg].")
                           ] = 0.0,
    max_notch_db: Annotated[float | None, typer.Option(help="Policy maximum notch depth "
                                                       "[dB].")] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """NASA-HDBK-7004 semi-empirical force limit of a random input, with predicted notches."""
    try:
        mode_list = [tuple(float(v) for v in part.split(":")) for part in modes.split(",")
                     if part.strip()]
    except ValueError as exc:
        raise CliError(f"--modes {modes!r}: write fn:mass:Q, e.g. 120:6:10") from exc
    if any(len(x) != 3 for x in mode_list):
        raise CliError(f"--modes {modes!r}: write fn:mass:Q, e.g. 120:6:10")
    if (environment is None) == (level is None):
        raise CliError("say --environment ID (compute) or --level ID (store with the level)")
    with work(db) as session:
        cmd = _command(
            transfers.ForceLimitIn, mass_kg=mass_kg, c2=c2, f0_hz=f0_hz, rolloff=rolloff,
            modes=[{"fn_hz": a, "mass_kg": b, "q": c} for a, b, c in mode_list],
            residual_mass_kg=residual_kg, max_notch_db=max_notch_db)
        if level is not None:
            row = transfers.set_level_force_limit(session, local_actor(), level, cmd)
            out = transfers.ForceLimitRead.model_validate(row.result)
        else:
            out = transfers.force_limit(session, environment, cmd)
    if as_json:
        emit_json(out)
        return
    typer.echo(f"force limit of {out.environment} (C^2 = {c2:g}, M0 = {mass_kg:g} kg, "
               f"f0 = {f0_hz:g} Hz, {out.rolloff_db_per_oct:.2f} dB/oct above): "
               f"{out.force_rms_n:.4g} N rms")
    table(["freq [Hz]", "force limit [N^2/Hz]"], zip(out.freq_hz, out.fsd_n2_hz, strict=True))
    if out.notches:
        typer.echo("predicted notches of the input ASD:")
        table(["from [Hz]", "to [Hz]", "deepest at [Hz]", "depth [dB]", "width [oct]",
               "acceptance"],
              [(n.f_lo_hz, n.f_hi_hz, n.f_deepest_hz, n.depth_db, n.width_oct,
                "needs approver" if n.exceeds_policy else "-") for n in out.notches])


@transfer_app.command("accept-notches")
def accept_notches(
    level: Annotated[int, typer.Option(help="Random test level id with a force limit.")],
    rationale: Annotated[str, typer.Option(help="Why the deep notches are acceptable.")],
    db: DbOption = None,
) -> None:
    """Accept (as an approver) notches deeper than the policy allows; recorded."""
    with work(db) as session:
        row = transfers.accept_notches(session, local_actor(), level, rationale)
        who = row.result["accepted_by"]
    typer.echo(f"notches of level {level} accepted by {who}")


class NotchSource(enum.StrEnum):
    survey = "survey"
    analysis = "analysis"


SOURCE_OF = {NotchSource.survey: "low-level survey", NotchSource.analysis: "analysis"}


def _pairs(option: str, text: str) -> tuple[list[float], list[float]]:
    """'f:v,f:v,...' -> (frequencies, values)."""
    try:
        pts = [tuple(float(v) for v in part.split(":")) for part in text.split(",")
               if part.strip()]
    except ValueError as exc:
        raise CliError(f"{option} {text!r}: write freq:value pairs, e.g. 20:1,200:8,2000:1"
                       ) from exc
    if not pts or any(len(p) != 2 for p in pts):
        raise CliError(f"{option} {text!r}: write freq:value pairs, e.g. 20:1,200:8,2000:1")
    return [p[0] for p in pts], [p[1] for p in pts]


def _pairs_file(option: str, path: Path) -> tuple[list[float], list[float]]:
    """A two-column CSV (frequency [Hz], |T| [g/g]); a header line and # lines are skipped."""
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise CliError(f"{option} {path}: {exc.strerror}") from exc
    f, g = [], []
    for n, row in enumerate(csv.reader(io.StringIO(text)), start=1):
        if not row or row[0].lstrip().startswith("#"):
            continue
        try:
            a, b = float(row[0]), float(row[1])
        except (ValueError, IndexError):
            if not f:  # a header
                continue
            raise CliError(f"{option} {path}: line {n} {','.join(row)!r} is not two numbers"
                           ) from None
        f.append(a)
        g.append(b)
    return f, g


@transfer_app.command("notch")
def notch(
    level: Annotated[int, typer.Option(help="Random or sine test level id: the notching is "
                                       "stored with it and printed in its specification.")],
    location: Annotated[str, typer.Option(help="Control or monitor location of the limit.")],
    source: Annotated[NotchSource, typer.Option(
        help="Where the transmissibility comes from: a low-level survey or an analysis.")],
    limit: Annotated[float | None, typer.Option(
        help="Constant response limit: g peak (sine) or g^2/Hz (random).")] = None,
    limit_table: Annotated[str, typer.Option(
        help="Or a limit table freq:limit, comma-separated [Hz:g or Hz:g^2/Hz].")] = "",
    transmissibility: Annotated[str, typer.Option(
        help="|response/input| table freq:gain, comma-separated [Hz:g/g].")] = "",
    transmissibility_file: Annotated[Path | None, typer.Option(
        help="Or a two-column CSV file: frequency [Hz], |response/input| [g/g].")] = None,
    source_note: Annotated[str, typer.Option(help="Which survey or analysis.")] = "",
    max_notch_db: Annotated[float | None, typer.Option(
        help="Deepest notch accepted without an approver [dB].")] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Notch a test level against a response limit through a transmissibility (stored)."""
    if bool(transmissibility) == (transmissibility_file is not None):
        raise CliError("give --transmissibility f:g,... or --transmissibility-file CSV")
    tf, tg = (_pairs("--transmissibility", transmissibility) if transmissibility
              else _pairs_file("--transmissibility-file", transmissibility_file))
    lf, lv = _pairs("--limit-table", limit_table) if limit_table else (None, None)
    cmd = _command(notching.NotchingIn, location=location, limit=limit, limit_freq_hz=lf,
                   limit_values=lv, transmissibility_freq_hz=tf, transmissibility_gain=tg,
                   transmissibility_source=SOURCE_OF[source], transmissibility_note=source_note,
                   max_notch_db=max_notch_db)
    with work(db) as session:
        out = notching.read_notching(session, notching.set_notching(session, local_actor(),
                                                                    level, cmd))
    if as_json:
        emit_json(out)
        return
    typer.echo(f"notching {out.id} of {out.level} at {out.location}: limit {out.limit}")
    if out.grms_before is not None:
        typer.echo(f"overall {out.grms_before:.4g} g rms, notched {out.grms_after:.4g} g rms")
    if not out.notches:
        typer.echo("the response stays under its limit: no notch")
    table(["from [Hz]", "to [Hz]", "deepest at [Hz]", "depth [dB]", "width [oct]", "acceptance"],
          [(n.f_lo_hz, n.f_hi_hz, n.f_deepest_hz, n.depth_db, n.width_oct,
            "needs approver" if n.exceeds_policy else "-") for n in out.notches])


@transfer_app.command("accept-notching")
def accept_notching(
    level: Annotated[int, typer.Option(help="Test level id with a response-limit notching.")],
    rationale: Annotated[str, typer.Option(help="Why the deep notches are acceptable.")],
    db: DbOption = None,
) -> None:
    """Accept (as an approver) response-limit notches deeper than allowed; recorded."""
    with work(db) as session:
        row = notching.accept_notching(session, local_actor(), level, rationale)
        who = row.result["accepted_by"]
    typer.echo(f"response-limit notches of level {level} accepted by {who}")
