"""Long work run as jobs: one row per job, its state, progress, result or error.

The row is the job's record for every runner (a thread of the serving process on
SQLite, procrastinate workers on PostgreSQL). It is editable state, not content: its
status moves queued -> running -> succeeded | failed | cancelled. A runner claims a row
by a conditional UPDATE (a fresh ``claim`` token) and stores the outcome only while its
claim still holds, in the same transaction as the job's own writes, so a job's result
is stored once however many workers picked it up.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Boolean, Float, Integer, String, Text
from sqlalchemy.orm import Mapped, mapped_column

from qualplan.store.base import Base
from qualplan.store.types import UtcDateTime, utcnow

#: The states of a job (a string column; the check is in planning).
JOB_STATES = ("queued", "running", "succeeded", "failed", "cancelled")


class Job(Base):
    __tablename__ = "jobs"

    id: Mapped[int] = mapped_column(primary_key=True)
    #: What to do (a key of planning.jobs.KINDS).
    kind: Mapped[str] = mapped_column(String(60), index=True)
    #: Its arguments (JSON).
    params: Mapped[dict[str, Any]] = mapped_column(JSON)
    status: Mapped[str] = mapped_column(String(20), index=True, default="queued")
    #: Fraction done, 0 to 1, and a phrase saying what is being done.
    progress: Mapped[float] = mapped_column(Float, default=0.0)
    phrase: Mapped[str] = mapped_column(String(200), default="waiting for a worker")
    result: Mapped[dict[str, Any] | None] = mapped_column(JSON, nullable=True)
    #: {"title", "detail", "field", "value"} of a failed job.
    error: Mapped[dict[str, Any] | None] = mapped_column(JSON, nullable=True)
    submitted_by: Mapped[str] = mapped_column(String(120))
    #: "thread" (in the serving process) or "procrastinate".
    runner: Mapped[str] = mapped_column(String(20))
    #: procrastinate's job id on PostgreSQL.
    queue_job_id: Mapped[int | None] = mapped_column(Integer, nullable=True)
    attempts: Mapped[int] = mapped_column(Integer, default=0)
    #: Token of the runner that holds the job (a new one each attempt).
    claim: Mapped[str | None] = mapped_column(String(40), nullable=True)
    worker: Mapped[str | None] = mapped_column(Text, nullable=True)
    cancel_requested: Mapped[bool] = mapped_column(Boolean, default=False)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime, default=utcnow)
    started_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
    finished_at: Mapped[datetime | None] = mapped_column(UtcDateTime, nullable=True)
