"""``qualplan modal ...``: modal summaries in, peak-response estimates out.

- ``modal import FILE --product P --name N``: a CSV or JSON table of modes as the next
  revision of the product's modal summary;
- ``modal list``, ``modal show SUMMARY [--revision N]``, ``modal history SUMMARY``;
- ``modal estimate SUMMARY --level L [--axis Z]``: the peak-response estimate from the
  latest revision and a level (SRS: ABS/SRSS/NRL/CQC; random: rms, 1/2/3 sigma,
  Davenport expected peak; sine: steady-state peak);
- ``modal estimates``, ``modal estimate-show ID``;
- ``modal evidence REQ --estimate ID --quantity Q --allowable A [--factor-of-safety FS]``:
  close an analysis requirement with MS = allowable / (FS x applied) - 1;
- ``report loads --product P [--axis Z] --out DIR``: the analysis loads package.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import DbOption, app
from qualplan.cli.common import JsonOption, ProgramOption, _program, _read_file, local_actor, work
from qualplan.cli.jobs import WaitOption
from qualplan.cli.output import emit_json, progress, table
from qualplan.cli.report import as_job, report_app
from qualplan.planning import catalog, documents, jobs, loads, requirements, wording
from qualplan.planning import modal as pm
from qualplan.planning.schemas import Axis
from qualplan.reports.loads import LoadsRenderer

modal_app = typer.Typer(rich_markup_mode=None,
    help="Modal summaries and peak-response estimates.",
                        no_args_is_help=True)
app.add_typer(modal_app, name="modal")


def _summary(session, ref: str, program, product: str | None):
    if ref.isdigit():
        return pm.summary_by_id(session, int(ref))
    prog = _program(session, program) if (program or product) else None
    prods = [catalog.product_ref(session, prog, product).id] if product else None
    rows = [x for x in pm.list_summaries(session) if x.name == ref
            and (prods is None or x.product_id in prods)]
    if len(rows) != 1:
        from qualplan.cli.base import CliError
        raise CliError(f"{len(rows)} modal summaries named {ref!r}: give its id or --product")
    return rows[0]


@modal_app.command("import")
def modal_import(
    path: Path,
    product: Annotated[str, typer.Option(help="Product name or id.")],
    name: Annotated[str, typer.Option(help="Name of the modal summary (e.g. the model).")],
    response_unit: Annotated[str | None, typer.Option(
        help="Unit of the response column, when the file does not declare it.")] = None,
    source: Annotated[str, typer.Option(help="Where the modes come from.")] = "",
    note: Annotated[str, typer.Option(help="Revision note.")] = "",
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Import a table of modes (CSV or JSON) as the next revision of a modal summary."""
    content = _read_file(path)
    with work(db) as session:
        prog = _program(session, program) if program else None
        prod = catalog.product_ref(session, prog, product)
        rev = pm.import_modal_summary(session, local_actor(), prod.id, name, path.name, content,
                                      source=source, note=note, response_unit=response_unit)
        out = pm.ModalRevisionRead.model_validate(rev)
    if as_json:
        emit_json(out)
        return
    typer.echo(f"modal summary {out.summary_id} {name!r} revision {out.number}: "
               f"{len(out.spec['modes'])} modes, content hash {out.content_hash[:12]}")


@modal_app.command("list")
def modal_list(
    product: Annotated[str | None, typer.Option(help="Product name or id.")] = None,
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """List modal summaries with their latest revision."""
    with work(db) as session:
        pid = None
        if product:
            prog = _program(session, program) if program else None
            pid = catalog.product_ref(session, prog, product).id
        rows = [pm.read_summary(session, x) for x in pm.list_summaries(session, pid)]
    if as_json:
        emit_json(rows)
        return
    table(["id", "product", "name", "revision", "modes"],
          [(r.id, r.product_id, r.name, r.latest_revision, r.modes) for r in rows])


def _mode_table(spec: dict) -> None:
    axes = sorted(spec["modes"][0]["meff_kg"])
    table(["mode", "fn [Hz]", "zeta", "Q", *[f"meff {a} [kg]" for a in axes]],
          [(md["mode"], md["fn_hz"], md["zeta"], 1 / (2 * md["zeta"]),
            *[md["meff_kg"][a] for a in axes]) for md in spec["modes"]])
    for a in axes:
        typer.echo(f"sum of effective masses on {a}: "
                   f"{sum(md['meff_kg'][a] for md in spec['modes']):.4g} kg")


@modal_app.command("show")
def modal_show(
    summary: str,
    revision: Annotated[int | None, typer.Option(help="Revision number (default latest).")] = None,
    product: Annotated[str | None, typer.Option(help="Product name or id.")] = None,
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Show the modes of a modal summary revision."""
    with work(db) as session:
        sm = _summary(session, summary, program, product)
        rev = pm.ModalRevisionRead.model_validate(pm.summary_revision(session, sm.id, revision))
    if as_json:
        emit_json(rev)
        return
    typer.echo(f"modal summary {sm.id} revision {rev.number} by {rev.author}, "
               f"hash {rev.content_hash[:12]}")
    _mode_table(rev.spec)


@modal_app.command("history")
def modal_history(summary: str, product: Annotated[str | None, typer.Option()] = None,
                  program: ProgramOption = None, db: DbOption = None,
                  as_json: JsonOption = False) -> None:
    """Revisions of a modal summary."""
    with work(db) as session:
        sm = _summary(session, summary, program, product)
        rows = [pm.ModalRevisionRead.model_validate(r) for r in pm.history(session, sm.id)]
    if as_json:
        emit_json(rows)
        return
    table(["revision", "modes", "author", "created", "hash", "note"],
          [(r.number, len(r.spec["modes"]), r.author, f"{r.created_at:%Y-%m-%d %H:%M}",
            r.content_hash[:12], r.note) for r in rows])


def _print_estimate(e: pm.EstimateRead) -> None:
    st = e.settings
    typer.echo(f"estimate {e.id}: {st['kind']} level {st['level']['name']!r} "
               f"#{st['level']['number']} x modal summary {st['modal_summary']['name']!r} "
               f"r{st['modal_summary']['revision']}, axis {st['axis']}"
               + ("  [STALE]" if e.stale else ""))
    for r in e.stale_reasons:
        typer.echo(f"  stale: {r}")
    typer.echo(e.result["method"])
    rows = e.result["modes"]
    cols = [k for k in rows[0] if k not in ("mode", "fn_hz", "zeta", "meff_kg")]
    units = {"srs_g": "[g]", "force_n": "[N]", "accel_rms_g": "[g rms]",
             "force_rms_n": "[N rms]", "nu0_hz": "[Hz]", "force_expected_peak_n": "[N]",
             "accel_g": "[g]", "freq_hz": "[Hz]", "in_band": "(1 = yes)"}
    table(["mode", "fn [Hz]", "zeta", "meff [kg]", *[f"{c} {units.get(c, '')}" for c in cols]],
          [(r["mode"], r["fn_hz"], r["zeta"], r["meff_kg"], *[r[c] for c in cols])
           for r in rows])
    typer.echo("")
    table(["quantity", "value", "unit", "basis"],
          [(k, q["value"], q["unit"], q["basis"]) for k, q in e.result["quantities"].items()])
    for n in e.result.get("notes", []):
        typer.echo(f"note: {n}")


@modal_app.command("estimate")
def modal_estimate(
    summary: str,
    level: Annotated[int, typer.Option(help="Level id.")],
    axis: Annotated[Axis | None, typer.Option(help="Axis (default the level's).")] = None,
    revision: Annotated[int | None, typer.Option(help="Modal revision (default latest).")] = None,
    duration_s: Annotated[float | None, typer.Option(
        help="Random: exposure for the expected peak [s] (default from the level).")] = None,
    no_residual: Annotated[bool, typer.Option(
        "--no-residual", help="Leave out the product mass not in the modes.")] = False,
    product: Annotated[str | None, typer.Option(help="Product name or id.")] = None,
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Peak-response estimate from a modal summary and a level."""
    with work(db) as session:
        sm = _summary(session, summary, program, product)
        rev = pm.summary_revision(session, sm.id, revision)
        est = pm.make_estimate(session, local_actor(), pm.EstimateIn(
            modal_revision_id=rev.id, level_id=level, axis=axis, duration_s=duration_s,
            residual_mass=not no_residual))
        out = pm.read_estimate(session, est)
    if as_json:
        emit_json(out)
    else:
        _print_estimate(out)


@modal_app.command("estimates")
def modal_estimates(
    product: Annotated[str | None, typer.Option(help="Product name or id.")] = None,
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """List response estimates and whether they are stale."""
    with work(db) as session:
        pid = None
        if product:
            prog = _program(session, program) if program else None
            pid = catalog.product_ref(session, prog, product).id
        rows = [pm.read_estimate(session, e) for e in pm.list_estimates(session, pid)]
    if as_json:
        emit_json(rows)
        return
    table(["id", "kind", "axis", "level", "modal summary", "stale"],
          [(e.id, e.settings["kind"], e.axis.value,
            f"{e.settings['level']['name']} #{e.settings['level']['number']}",
            f"{e.settings['modal_summary']['name']} r{e.settings['modal_summary']['revision']}",
            "yes" if e.stale else "no") for e in rows])


@modal_app.command("estimate-show")
def modal_estimate_show(estimate: int, db: DbOption = None, as_json: JsonOption = False) -> None:
    """Show a response estimate."""
    with work(db) as session:
        out = pm.read_estimate(session, pm.estimate_by_id(session, estimate))
    if as_json:
        emit_json(out)
    else:
        _print_estimate(out)


@modal_app.command("evidence")
def modal_evidence(
    requirement: str,
    estimate: Annotated[int, typer.Option(help="Estimate id.")],
    quantity: Annotated[str, typer.Option(help="Quantity of the estimate (e.g. "
                                          "base_force_cqc_n).")],
    allowable: Annotated[float, typer.Option(help="Allowable, in the quantity's unit.")],
    factor_of_safety: float = 1.0,
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
) -> None:
    """Record an estimate as analysis evidence: MS = allowable / (FS x applied) - 1."""
    with work(db) as session:
        prog = _program(session, program)
        req = requirements.requirement_ref(session, prog, requirement)
        ev = pm.record_as_evidence(session, local_actor(), req.id, pm.EstimateEvidenceIn(
            estimate_id=estimate, quantity=quantity, allowable=allowable,
            factor_of_safety=factor_of_safety, note=note))
    typer.echo(f"evidence {ev.id}: {ev.verdict.value}; {ev.summary['reason']}")


@report_app.command("loads")
def report_loads(
    product: Annotated[str, typer.Option(help="Product name or id.")],
    axis: Annotated[Axis | None, typer.Option(help="One axis only (default all).")] = None,
    out: Annotated[Path, typer.Option("--out", help="Folder for the PDF, CSV and JSON files.")
                   ] = Path("."),
    levels: Annotated[str | None, typer.Option(
        help="Level ids, comma-separated (default: the newest analysis levels).")] = None,
    number: Annotated[str | None, typer.Option(
        help="Document number (default ALP-<part>[-<axis>]).")] = None,
    note: Annotated[str, typer.Option(help="Revision note (why this issue).")] = "",
    program: ProgramOption = None,
    wait: WaitOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Issue the analysis loads package of a product (tables, solver settings, caution;
    with --wait or --no-wait, built and rendered as a job)."""
    ids = [int(x) for x in levels.split(",") if x.strip()] if levels else None
    with work(db) as session:
        prog = _program(session, program) if program else None
        prod = catalog.product_ref(session, prog, product)
        prod_id = prod.id
        if wait is None:
            content = loads.loads_content(session, prod.id, axis=axis, level_ids=ids,
                                          number=number, note=note)
            with progress("rendering the loads package"):
                issued = documents.issue_document(session, local_actor(), content,
                                                  LoadsRenderer(), out)
    if wait is not None:
        as_job(db, jobs.DocumentJob(document="loads", product_id=prod_id,
                                    axis=axis.value if axis else None, level_ids=ids,
                                    number=number, note=note, out_dir=str(out.resolve())),
               wait=wait, as_json=as_json)
        return
    if as_json:
        emit_json(issued.model_dump(mode="json"))
        return
    state = "issued" if issued.new_revision else "unchanged since, re-rendered"
    typer.echo(f"{issued.number} revision {issued.revision} ({state}), content hash "
               f"{issued.content_hash[:12]}")
    for path in issued.files:
        typer.echo(f"  {path}")


@modal_app.command("steinberg")
def modal_steinberg(
    estimate: Annotated[int, typer.Option(help="Random estimate id.")],
    mode: Annotated[int, typer.Option(help="Mode number of the board's fundamental.")],
    board_edge_mm: Annotated[float, typer.Option(help="Board edge B parallel to the "
                                                 "component [mm].")],
    component_length_mm: Annotated[float, typer.Option(help="Component length L [mm].")],
    board_thickness_mm: Annotated[float, typer.Option(help="Board thickness h [mm].")],
    c: Annotated[float, typer.Option(help="Component constant (1.0 DIP, 2.25 leadless "
                                     "chip carrier; from memory).")] = 1.0,
    r: Annotated[float, typer.Option(help="Position factor (1.0 at the board centre).")] = 1.0,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Steinberg's allowable board displacement against the 3-sigma displacement of a mode."""
    with work(db) as session:
        out = pm.steinberg_from_estimate(
            session, estimate, mode, board_edge_mm=board_edge_mm,
            component_length_mm=component_length_mm, board_thickness_mm=board_thickness_mm,
            c=c, r=r)
    if as_json:
        emit_json(out)
        return
    typer.echo(f"mode {out['mode']} at {wording.frequency(out['fn_hz'])}, "
               f"{wording.number(out['response_grms'])} g rms: "
               f"3-sigma displacement {out['z_3sigma_mm']:.4g} mm, allowable "
               f"{out['z_allow_mm']:.4g} mm, ratio {out['ratio']:.3g} -> "
               f"{'passes' if out['passes'] else 'FAILS'}")
    typer.echo(out["basis"])
