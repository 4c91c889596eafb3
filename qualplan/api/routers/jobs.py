"""Long work as jobs: submit (202 and the job's location), follow, cancel."""

from __future__ import annotations

from fastapi import APIRouter, Request, Response

from qualplan.api.deps import ActorDep, ReaderDep, SessionDep
from qualplan.planning import jobs

router = APIRouter(tags=["jobs"])


def _dispatch(request: Request, session, job_id: int) -> None:
    runner = request.app.state.jobs
    jobs.after_commit(session, lambda: runner.dispatch(job_id))


@router.post("/jobs", status_code=202, response_model=jobs.JobRead)
def submit_job(cmd: jobs.JobSubmit, request: Request, response: Response,
               session: SessionDep, actor: ActorDep):
    """Queue a job (`kind`: record_analysis {revision_id, resolution_hz} or record_import
    {path, filename, record, reading}); it runs once the request has committed: on
    PostgreSQL in a `qualplan worker`, on SQLite in a thread of this process. Follow it at
    the `Location`."""
    runner = request.app.state.jobs
    job = jobs.submit_job(session, actor, cmd, runner=runner.name)
    _dispatch(request, session, job.id)
    response.headers["Location"] = f"{request.scope.get('root_path', '')}/api/v1/jobs/{job.id}"
    return jobs.JobRead.model_validate(job)


@router.get("/jobs/{job_id}", response_model=jobs.JobRead)
def get_job(job_id: int, session: SessionDep, _: ReaderDep):
    """Status, progress (fraction and phrase), result or error of a job."""
    return jobs.read_job(session, job_id)


@router.post("/jobs/{job_id}/cancel", response_model=jobs.JobRead)
def cancel_job(job_id: int, request: Request, session: SessionDep, actor: ActorDep):
    """Cancel a queued job, or ask a running one to stop (its work is rolled back)."""
    job = jobs.cancel_job(session, actor, job_id)
    runner = request.app.state.jobs
    if job.status == "cancelled" and hasattr(runner, "cancel"):
        queue_id = job.queue_job_id
        jobs.after_commit(session, lambda: runner.cancel(queue_id))
    return jobs.JobRead.model_validate(job)
