"""Jobs on PostgreSQL through procrastinate: the queue the API defers to and the workers run.

procrastinate (https://procrastinate.readthedocs.io, 3.x) keeps its queue in the same
PostgreSQL database (its schema is applied by migration 0012). A job is deferred once
its ``jobs`` row has committed; a worker (``qualplan worker``, any number, on any
machine that reaches the database) fetches it with ``SELECT ... FOR UPDATE SKIP
LOCKED`` and calls :func:`qualplan.planning.jobs.run_job`, which stores the outcome
once. Workers send heartbeats; every worker also runs a periodic task that hands the
jobs of a worker silent for :data:`STALLED_AFTER_S` back to the queue, so a killed
worker's job is run again by another one.
"""

from __future__ import annotations

import asyncio
import logging
import os
import socket
from typing import Any

from sqlalchemy.engine import make_url

from qualplan.planning import jobs
from qualplan.store.session import make_engine, make_sessionmaker, normalise_url

QUEUE = "qualplan"
TASK = "qualplan.run_job"
#: A worker silent this long [s] is taken as lost and its jobs are retried.
STALLED_AFTER_S = 30.0

log = logging.getLogger("qualplan.worker")


def conninfo(database_url: str) -> str:
    """The libpq URI of a SQLAlchemy PostgreSQL URL (driver name dropped, query kept)."""
    url = make_url(normalise_url(database_url))
    if url.get_backend_name() != "postgresql":
        raise ValueError("the job queue needs PostgreSQL; on SQLite jobs run in the "
                         "serving process")
    return url.set(drivername="postgresql").render_as_string(hide_password=False)


def make_app(database_url: str, *, sync: bool = False, stalled_after_s: float = STALLED_AFTER_S):
    """The procrastinate app with qualplan's task (sync: for deferring from sync code)."""
    import procrastinate

    info = conninfo(database_url)
    connector = (procrastinate.SyncPsycopgConnector(conninfo=info) if sync
                 else procrastinate.PsycopgConnector(conninfo=info))
    app = procrastinate.App(connector=connector)
    state: dict[str, Any] = {}

    def factory():
        if "factory" not in state:
            state["factory"] = make_sessionmaker(make_engine(database_url))
        return state["factory"]

    @app.task(name=TASK, queue=QUEUE, pass_context=True)
    def run(context, job_id: int) -> str:
        worker = f"{socket.gethostname()} pid {os.getpid()} worker {context.worker_name}"
        status = jobs.run_job(factory(), job_id, worker=worker)
        log.info("job %s %s", job_id, status, extra={"job_id": job_id, "status": status})
        return status

    @app.periodic(cron="* * * * * */10", periodic_id="qualplan-retry-stalled")
    @app.task(name="qualplan.retry_stalled", queue=QUEUE, queueing_lock="retry-stalled",
              pass_context=True)
    async def retry_stalled(context, timestamp: int) -> None:
        manager = context.app.job_manager
        for job in await manager.get_stalled_jobs(task_name=TASK,
                                                  seconds_since_heartbeat=stalled_after_s):
            log.warning("job %s of a lost worker is retried", job.id)
            await manager.retry_job(job)

    return app


class QueueRunner:
    """Defers jobs to procrastinate (the API's and the CLI's side of the queue)."""

    name = "procrastinate"

    def __init__(self, database_url: str) -> None:
        self.database_url = database_url
        self.app = make_app(database_url, sync=True)
        self._opened = False

    def _open(self):
        if not self._opened:
            self.app.open()
            self._opened = True

    def dispatch(self, job_id: int) -> int:
        self._open()
        queue_id = self.app.tasks[TASK].defer(job_id=job_id)
        factory = make_sessionmaker(make_engine(self.database_url))
        _record_queue_id(factory, job_id, queue_id)
        return queue_id

    def cancel(self, queue_job_id: int | None) -> None:
        if queue_job_id is not None:
            self._open()
            self.app.job_manager.cancel_job_by_id(queue_job_id, abort=True)

    def ready(self) -> bool:
        try:
            self._open()
            return bool(self.app.check_connection())
        except Exception:  # noqa: BLE001 - readiness answers yes or no
            return False

    def close(self) -> None:
        if self._opened:
            self.app.close()
            self._opened = False


def _record_queue_id(factory, job_id: int, queue_id: int) -> None:
    from sqlalchemy import update

    from qualplan.store.jobs import Job

    with factory() as s, s.begin():
        s.execute(update(Job).where(Job.id == job_id).values(queue_job_id=queue_id))


def run_worker(database_url: str, *, concurrency: int = 1, wait: bool = True,
               stalled_after_s: float = STALLED_AFTER_S, name: str | None = None) -> None:
    """Run one worker in the foreground until stopped (SIGINT/SIGTERM), or until the queue
    is empty with ``wait=False``."""
    app = make_app(database_url, stalled_after_s=stalled_after_s)

    options: dict[str, Any] = {"queues": [QUEUE], "concurrency": concurrency, "wait": wait,
                               "update_heartbeat_interval": min(2.0, stalled_after_s / 3),
                               "stalled_worker_timeout": stalled_after_s,
                               "install_signal_handlers": wait,
                               "fetch_job_polling_interval": 1.0}
    if name:
        options["name"] = name

    async def main() -> None:
        async with app.open_async():
            await app.run_worker_async(**options)

    asyncio.run(main())
