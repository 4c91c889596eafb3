"""``qualplan worker`` (procrastinate on PostgreSQL), ``qualplan job show / cancel`` and
``qualplan record analyse`` (a job: waits with a progress bar, or ``--no-wait``)."""

from __future__ import annotations

from typing import Annotated

import typer

from qualplan.cli.base import CliError, DbOption, app, checked_engine, database_url
from qualplan.cli.common import cli_actor
from qualplan.cli.output import emit_json
from qualplan.cli.records import record_app
from qualplan.planning import jobs
from qualplan.reports import RENDERERS
from qualplan.store.session import make_sessionmaker, unit_of_work

job_app = typer.Typer(help="Long work run as jobs: follow or cancel.", no_args_is_help=True)
app.add_typer(job_app, name="job")


@app.command()
def worker(
    concurrency: Annotated[int, typer.Option(
        min=1, max=64, help="Jobs run at once by this process (1 to 64).")] = 1,
    burst: Annotated[bool, typer.Option(
        help="Stop once the queue is empty instead of waiting for more jobs.")] = False,
    db: DbOption = None,
) -> None:
    """Run jobs from the PostgreSQL queue (start any number, on any machine)."""
    url = database_url(db)
    engine = checked_engine(db)
    dialect = engine.dialect.name
    engine.dispose()
    if dialect != "postgresql":
        raise CliError("qualplan worker needs PostgreSQL: on SQLite, jobs run in the "
                       "`qualplan serve` process (and the CLI runs its own)")
    if concurrency < 1:
        raise CliError(f"--concurrency={concurrency}: must be 1 or more")
    from qualplan.planning.queue import run_worker

    jobs.register_renderers(RENDERERS)  # this worker issues documents too
    typer.echo(f"worker on the queue of {engine.url.render_as_string(hide_password=True)}; "
               "stop with Ctrl+C", err=True)
    run_worker(url, concurrency=concurrency, wait=not burst)


def _show(job: jobs.JobRead, as_json: bool) -> None:
    if as_json:
        emit_json(job.model_dump(mode="json"))
        return
    typer.echo(f"job {job.id} ({job.kind}): {job.status}, {100 * job.progress:.0f} % "
               f"- {job.phrase}")
    if job.error:
        typer.echo(f"error: {job.error.get('detail')}")


def submit_and_follow(db: str | None, cmd: jobs.JobSubmit, *, wait: bool,
                      as_json: bool) -> jobs.JobRead:
    """Queue a job; on SQLite run it here, on PostgreSQL defer it to the workers. Wait
    with a progress bar (rich) unless `wait` is false (then print the job id)."""
    return follow(db, lambda session, actor, runner: jobs.submit_job(
        session, actor, cmd, runner=runner), wait=wait, as_json=as_json)


#: The option of the commands that can run their work as a job.
WaitOption = Annotated[bool | None, typer.Option(
    "--wait/--no-wait", help="Run as a job: wait with a progress bar, or print the job id "
    "and return (PostgreSQL and a `qualplan worker`). Without either, the work runs in "
    "this command as before.")]


def follow(db: str | None, submit, *, wait: bool, as_json: bool, show: bool = True
           ) -> jobs.JobRead:
    """:func:`submit_and_follow` for a job queued by its own use case:
    `submit(session, actor, runner_name)` returns the queued job row. `show=False` prints
    nothing of a succeeded job (the command prints what it made)."""
    jobs.register_renderers(RENDERERS)  # document jobs run in this process on SQLite
    engine = checked_engine(db)
    factory = make_sessionmaker(engine)
    sqlite = engine.dialect.name == "sqlite"
    if sqlite and not wait:
        raise CliError("--no-wait needs PostgreSQL and a `qualplan worker`: on SQLite "
                       "the job runs in this process, so the command waits for it")
    runner = jobs.ThreadRunner(factory) if sqlite else None
    if runner is None:
        from qualplan.planning.queue import QueueRunner

        runner = QueueRunner(database_url(db))
    with unit_of_work(make_sessionmaker(engine, write=True)) as session:
        job_id = submit(session, cli_actor(session), runner.name).id
    if not wait:
        runner.dispatch(job_id)
        runner.close()
        typer.echo(job_id)
        with factory() as s:
            return jobs.read_job(s, job_id)
    runner.dispatch(job_id)
    from rich.progress import Progress

    with Progress(transient=True) as bar:
        task = bar.add_task("queued", total=1.0)
        job = jobs.wait_for(factory, job_id, show=lambda f, p: bar.update(
            task, completed=f, description=p))
    runner.close()
    if show or job.status != "succeeded":
        _show(job, as_json)
    if job.status != "succeeded":
        raise typer.Exit(1)
    return job


@record_app.command("analyse")
def record_analyse(
    revision_id: Annotated[int, typer.Argument(help="Revision id of the record.")],
    resolution_hz: Annotated[float, typer.Option(help="Welch line spacing [Hz].")] = 5.0,
    wait: Annotated[bool, typer.Option("--wait/--no-wait",
                                       help="Wait with a progress bar, or print the job id "
                                       "and return (PostgreSQL).")] = True,
    db: DbOption = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """Welch PSD [g^2/Hz] and statistics of every channel of a stored record, as a job."""
    job = submit_and_follow(db, jobs.JobSubmit(kind="record_analysis", params={
        "revision_id": revision_id, "resolution_hz": resolution_hz}), wait=wait,
        as_json=as_json)
    if wait and not as_json and job.result:
        for ch in job.result["channels"]:
            w = ch["welch"]
            typer.echo(f"  {ch['name']} ({ch['axis']}): {w['grms']['value']:.4g} g rms from "
                       f"the Welch PSD at {w['resolution_hz']:.4g} Hz, {w['n_segments']} "
                       f"segments; rms {ch['rms']['value']:.4g} g rms, peak "
                       f"{ch['peak']['value']:.4g} g")


@job_app.command("show")
def job_show(job_id: int, db: DbOption = None,
             as_json: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False
             ) -> None:
    """Status, progress, result or error of a job."""
    engine = checked_engine(db)
    with make_sessionmaker(engine)() as s:
        cli_actor(s)  # a user of the database; its session sees its programs only
        _show(jobs.read_job(s, job_id), as_json)


@job_app.command("cancel")
def job_cancel(job_id: int, db: DbOption = None) -> None:
    """Cancel a queued job, or ask a running one to stop."""
    engine = checked_engine(db)
    with unit_of_work(make_sessionmaker(engine, write=True)) as s:
        job = jobs.cancel_job(s, cli_actor(s), job_id)
        _show(jobs.JobRead.model_validate(job), False)
