"""Jobs: a job's page (a progress bar, the phrase, the result's links, cancel) and the
files a document job wrote."""

from __future__ import annotations

import mimetypes

from fastapi import APIRouter, Request
from fastapi.responses import FileResponse, Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import jobs
from qualplan.web.common import Ctx, CtxDep, action, form_of, page, problem_page, render

router = APIRouter(include_in_schema=False)

#: Seconds between two reloads of the page of a job not done yet.
REFRESH_S = 1


def job_page(ctx: Ctx, job_id: int, error=None, status=200) -> Response:
    job = jobs.read_job(ctx.db, job_id)
    title = jobs.KINDS[job.kind].title if job.kind in jobs.KINDS else job.kind
    return render(ctx, "web/job.html", status, job=job, title=title, error=error,
                  refresh_s=None if job.done else REFRESH_S)


@router.get("/jobs/{job_id}")
def job(job_id: int, ctx: Ctx = CtxDep) -> Response:
    return page(ctx, lambda: job_page(ctx, job_id))


@router.post("/jobs/{job_id}/cancel")
async def cancel_job(job_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        row = jobs.cancel_job(ctx.db, ctx.actor, job_id)
        runner = request.app.state.jobs
        if row.status == "cancelled" and hasattr(runner, "cancel"):
            queue_id = row.queue_job_id
            jobs.after_commit(ctx.db, lambda: runner.cancel(queue_id))
        return f"/jobs/{job_id}"

    return await run_in_threadpool(action, ctx, form, do, lambda msg, code: job_page(
        ctx, job_id, msg, code))


@router.get("/jobs/{job_id}/files/{name}")
def job_file(job_id: int, name: str, ctx: Ctx = CtxDep) -> Response:
    def build() -> Response:
        path = jobs.job_file(ctx.db, job_id, name)
        return FileResponse(path, media_type=mimetypes.guess_type(name)[0]
                            or "application/octet-stream", filename=name)

    return page(ctx, build)


__all__ = ["job_page", "problem_page", "router"]
