"""`qualplan level`: derive, show and list test and analysis levels."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import CliError, DbOption
from qualplan.cli.common import JsonOption, ProgramOption, _program, group, local_actor, work
from qualplan.cli.jobs import WaitOption, follow
from qualplan.cli.output import emit_json, progress, table
from qualplan.planning import (
    approvals,
    catalog,
    documents,
    environments,
    jobs,
    levels,
    margins,
    policies,
    wording,
)
from qualplan.planning import schemas as s
from qualplan.planning.schemas import (
    Axis,
    Grade,
    LevelPurpose,
)
from qualplan.reports import tables

level_app = group("level", "Derived test and analysis levels.")


# --- levels -----------------------------------------------------------------------------


@level_app.command("derive")
def level_derive(
    name: str,
    product: Annotated[str, typer.Option(help="Product name or id.")],
    kind: Annotated[str, typer.Option(help="random, sine or shock.")],
    axis: Annotated[Axis, typer.Option(help="Axis.")],
    revisions: Annotated[str | None, typer.Option(
        help="Environment revision ids (global), comma-separated.")] = None,
    inputs: Annotated[str | None, typer.Option(
        help="Environments by name or id, each with @n for revision n (latest without): "
        "'flight Z@2,road X'.")] = None,
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
    window: Annotated[str, typer.Option(
        help="Record analysis window: hann, hamming, boxcar, blackman, flattop.")] = "hann",
    resolution_hz: Annotated[float | None, typer.Option(
        help="Record analysis line spacing [Hz] (default: 4 lines below the policy band's "
        "lower edge).")] = None,
    segment_s: Annotated[float | None, typer.Option(
        help="Record analysis segment length [s] (instead of --resolution-hz).")] = None,
    overlap: Annotated[float, typer.Option(help="Segment overlap [fraction].")] = 0.5,
    maximax_window_s: Annotated[float | None, typer.Option(
        help="Length of each maximax window [s] (default max(1 s, 4 segments)).")] = None,
    program: ProgramOption = None,
    wait: WaitOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Derive a test or analysis level from environment revisions (--inputs by name,
    --revisions by id, or both). With --wait or --no-wait the derivation runs as a job
    (for many or long inputs)."""
    if revisions is None and inputs is None:
        raise CliError("give the inputs: --inputs 'flight Z@2,road X' or --revisions 3,4")
    try:
        ids = [int(x) for x in (revisions or "").split(",") if x.strip()]
    except ValueError as exc:
        raise CliError(f"--revisions {revisions!r}: give revision ids like 3,4,7") from exc
    with work(db) as session:
        prog = _program(session, program)
        prod = catalog.product_ref(session, prog, product)
        if inputs is not None:
            ids += [i for i in environments.revision_ids_of_inputs(session, prod.id, inputs)
                    if i not in ids]
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
            analysis=s.RecordAnalysis(window=window, resolution_hz=resolution_hz,
                                      segment_s=segment_s, overlap=overlap,
                                      maximax_window_s=maximax_window_s),
        )
        if wait is None:
            with progress("deriving the level and its FDS/ERS coverage"):
                level = levels.derive_level(session, local_actor(), recipe)
            out = levels.read_level(session, level)
    if wait is not None:
        job = follow(db, lambda session, actor, runner: jobs.submit_derivation(
            session, actor, recipe, runner=runner), wait=wait, as_json=as_json,
            show=not as_json)
        if not wait:
            return
        with work(db) as session:
            out = levels.read_level(session, levels.level_by_id(
                session, job.result["level_id"]))
    if as_json:
        emit_json(out)
    else:
        _print_level(out)


def _covers(ok: bool) -> str:
    return "covers the life" if ok else "does NOT cover the life"


def _print_level(level: s.LevelRead) -> None:
    r = level.result
    typer.echo(
        f"level {level.name} #{level.number} (id {level.id}): {level.purpose.value}, "
        f"{level.grade.value if level.grade else ''} {level.kind.value}, axis "
        f"{level.axis.value}, hash {level.level_hash[:12]}"
    )
    if r.kind == "random":
        table(["freq [Hz]", "ASD [g^2/Hz]"], zip(r.freq_hz, r.asd_g2_hz, strict=True))
        typer.echo(
            f"overall {wording.number(r.grms)} g rms"
            + (f", {wording.duration(r.duration_s)} per axis" if r.duration_s is not None
               else "")
        )
    elif r.kind == "shock":
        table(["freq [Hz]", "SRS [g]"], zip(r.freq_hz, r.accel_g, strict=True))
        typer.echo(
            f"Q = {wording.number(r.q)}, tolerance {wording.decibels(r.lower_db)} / "
            f"{wording.decibels(r.upper_db)}, "
            f"{r.shocks_per_axis} shocks per axis"
        )
    else:
        table(["freq [Hz]", "amplitude [g peak]"], zip(r.freq_hz, r.accel_g, strict=True))
        typer.echo(
            f"{wording.number(r.sweep_rate_oct_per_min)} oct/min {r.direction}, "
            f"{wording.count(r.sweeps, 'sweep')}, {wording.duration(r.sweep_time_s)}"
        )
    cov = r.coverage
    if cov is not None and cov.fn_hz:
        for b, item in cov.by_b.items():
            typer.echo(
                f"FDS coverage b = {b}: worst "
                f"{wording.decibels(item.worst_db, item.required_db)} at "
                f"{wording.frequency(item.worst_fn_hz)} ({_covers(item.passed)})"
            )
        if cov.ers is not None:
            typer.echo(
                f"ERS coverage: worst "
                f"{wording.decibels(cov.ers.worst_db, cov.ers.required_db)} at "
                f"{wording.frequency(cov.ers.worst_fn_hz)} ({_covers(cov.ers.passed)})"
            )
    if cov is not None:
        for note in cov.notes:
            typer.echo(f"coverage note: {note}")
    if r.kind == "random" and r.load_factor is not None:
        lf = r.load_factor
        where = f"{wording.frequency(lf.fn_hz)}, Q = {wording.number(lf.q)}"
        if lf.exact_grms is None:  # a row of the first release: Miles only
            typer.echo(f"3-sigma load factor at {where}: {lf.three_sigma_g:.2f} g "
                       f"(Miles' approximation, {lf.miles_grms:.2f} g rms)")
        else:
            typer.echo(
                f"3-sigma load factor at {where}: {lf.three_sigma_g:.2f} g "
                f"(exact SDOF response {lf.exact_grms:.3f} g rms; Miles' approximation "
                f"{lf.miles_grms:.3f} g rms, {lf.miles_difference_pct:+.1f} %)")
        typer.echo(f"  caution: {lf.caution}")
    typer.echo("derivation:")
    for st in r.steps:
        typer.echo("  " + wording.step_sentence(st, grade=level.grade.value if level.grade
                                                else None, policy=level.policy_name))
    v = r.verdicts
    typer.echo("verdicts: " + "; ".join(margins.verdict_words(v)))
    for reason in v.reasons:
        typer.echo(f"  {reason}")
    for reason in level.stale_reasons:
        typer.echo(f"STALE: {reason}")


@level_app.command("withdraw")
def level_withdraw(
    level_id: int,
    reason: Annotated[str, typer.Option(help="Why it is withdrawn (kept in history).")],
    db: DbOption = None,
) -> None:
    """Withdraw a level: it leaves the default baselines; requirements on it become stale."""
    with work(db) as session:
        approvals.withdraw_level(session, local_actor(), level_id, reason)
        out = levels.read_level(session, levels.level_by_id(session, level_id))
    typer.echo(f"level {out.name} #{out.number} (id {out.id}) {out.withdrawn}")


def _db(x: float | None) -> str:
    return "-" if x is None else wording.decibels(x)


def print_difference(d: s.LevelDifference) -> None:
    typer.echo(f"level {d.name} #{d.old_number} (id {d.level_id}) re-derived as "
               f"#{d.new_number} on the latest revisions of its inputs:")
    for c in d.inputs:
        typer.echo(f"  {c.environment}: revision {c.old_revision} -> {c.new_revision}")
    if not d.inputs:
        typer.echo("  (no input has a newer revision; the life cycle or the policy changed)")
    table(["freq [Hz]", f"old [{d.unit}]", f"new [{d.unit}]", "new/old [dB]"],
          [(wording.number(r.freq_hz), "-" if r.old is None else wording.number(r.old),
            "-" if r.new is None else wording.number(r.new), _db(r.db)) for r in d.rows])
    typer.echo(f"{d.overall_quantity}: {wording.number(d.overall_old)} -> "
               f"{wording.number(d.overall_new)} {d.overall_unit} ({_db(d.overall_db)}); "
               f"largest change at a breakpoint {_db(d.max_abs_db)} in magnitude")


@level_app.command("rederive")
def level_rederive(
    level_id: int,
    yes: Annotated[bool, typer.Option("--yes", help="Store without asking.")] = False,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Re-run a level's recipe on the latest revisions of its inputs: show the difference
    per breakpoint and overall in dB, then store the new level, which supersedes the old."""
    with work(db) as session:
        diff = levels.rederive_level(session, local_actor(), level_id, store=False)
        if not as_json:
            print_difference(diff)
        if not yes and not typer.confirm(f"store {diff.name} #{diff.new_number}, "
                                         f"superseding #{diff.old_number}?", default=False):
            typer.echo("not stored")
            raise typer.Exit(1)
        diff = levels.rederive_level(session, local_actor(), level_id, store=True)
    if as_json:
        emit_json(diff)
    else:
        typer.echo(f"stored {diff.name} #{diff.new_number} (id {diff.new_level_id}); "
                   f"#{diff.old_number} is superseded")


@level_app.command("show")
def level_show(level_id: int, db: DbOption = None, as_json: JsonOption = False) -> None:
    """Show a level, its coverage and whether it is stale."""
    with work(db) as session:
        out = levels.read_level(session, levels.level_by_id(session, level_id))
    if as_json:
        emit_json(out)
    else:
        _print_level(out)


@level_app.command("export")
def level_export(
    level_id: int,
    out: Annotated[Path | None, typer.Option(
        "--out", help="File to write (default: print the table).")] = None,
    digits: Annotated[int, typer.Option(
        min=1, max=17, help="Significant figures of the values.")] = wording.SIGNIFICANT,
    as_json: JsonOption = False,
    db: DbOption = None,
) -> None:
    """Export a level's breakpoint table (CSV with # comment lines, or --json with a
    caution field): random [Hz, g^2/Hz], shock SRS [Hz, g], sine bands [Hz, mm, g]."""
    with work(db) as session:
        export = documents.level_export(session, level_id)
    text = export.model_dump_json(indent=2) + "\n" if as_json else \
        tables.level_export_csv(export, digits)
    if out is None:
        typer.echo(text, nl=False)
        return
    try:
        out.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise CliError(f"--out {out}: cannot write ({exc.strerror})") from exc
    typer.echo(f"wrote {out}")


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
