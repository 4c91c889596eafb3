"""Long work as jobs: submit (202 and the job's location), follow, cancel."""

from __future__ import annotations

import mimetypes

from fastapi import APIRouter, Query, Request, Response
from fastapi.responses import FileResponse, JSONResponse

from qualplan.api.deps import ActorDep, ReaderDep, SessionDep
from qualplan.planning import jobs

router = APIRouter(tags=["jobs"])

#: The `?job=true` option of the routes that can run their work as a job.
JobOption = Query(description="Run as a job: answer 202 with the job resource (its "
                  "`Location`) at once; the job's result links what it made.")
#: The OpenAPI entry of a 202 job answer.
ACCEPTED = {202: {"model": jobs.JobRead,
                  "description": "Queued as a job (with `job=true`): follow it at the "
                  "`Location`; its result links the created level or document."}}


def _dispatch(request: Request, session, job_id: int) -> None:
    runner = request.app.state.jobs
    jobs.after_commit(session, lambda: runner.dispatch(job_id))


def runner_name(request: Request) -> str:
    return request.app.state.jobs.name


def accepted(request: Request, session, job) -> JSONResponse:
    """202 with the job resource and its `Location`; the job is dispatched once the
    request's transaction has committed."""
    _dispatch(request, session, job.id)
    return JSONResponse(jobs.JobRead.model_validate(job).model_dump(mode="json"),
                        status_code=202, headers={"Location": _location(request, job.id)})


def _location(request: Request, job_id: int) -> str:
    return f"{request.scope.get('root_path', '')}/api/v1/jobs/{job_id}"


@router.post("/jobs", status_code=202, response_model=jobs.JobRead)
def submit_job(cmd: jobs.JobSubmit, request: Request, response: Response,
               session: SessionDep, actor: ActorDep):
    """Queue a job (`kind`: record_analysis {revision_id, resolution_hz}, record_import
    {path, filename, record, reading} or level_derive {recipe}; documents are issued as
    jobs by the document routes with `job=true`); it runs once the request has committed: on
    PostgreSQL in a `qualplan worker`, on SQLite in a thread of this process. Follow it at
    the `Location`."""
    runner = request.app.state.jobs
    job = jobs.submit_job(session, actor, cmd, runner=runner.name)
    _dispatch(request, session, job.id)
    response.headers["Location"] = _location(request, job.id)
    return jobs.JobRead.model_validate(job)


@router.get("/jobs/{job_id}", response_model=jobs.JobRead)
def get_job(job_id: int, session: SessionDep, _: ReaderDep):
    """Status, progress (fraction and phrase), result or error of a job."""
    return jobs.read_job(session, job_id)


@router.get("/jobs/{job_id}/files/{name}", response_class=FileResponse,
            responses={200: {"content": {"application/pdf": {}, "text/csv": {},
                                         "application/json": {}}}})
def get_job_file(job_id: int, name: str, session: SessionDep, _: ReaderDep):
    """A file a document job wrote (listed in its result's `files`): the issued PDF, its
    CSV tables and JSON."""
    path = jobs.job_file(session, job_id, name)
    kind = mimetypes.guess_type(name)[0] or "application/octet-stream"
    return FileResponse(path, media_type=kind, filename=name)


@router.post("/jobs/{job_id}/cancel", response_model=jobs.JobRead)
def cancel_job(job_id: int, request: Request, session: SessionDep, actor: ActorDep):
    """Cancel a queued job, or ask a running one to stop (its work is rolled back)."""
    job = jobs.cancel_job(session, actor, job_id)
    runner = request.app.state.jobs
    if job.status == "cancelled" and hasattr(runner, "cancel"):
        queue_id = job.queue_job_id
        jobs.after_commit(session, lambda: runner.cancel(queue_id))
    return jobs.JobRead.model_validate(job)
