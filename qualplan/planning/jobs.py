"""Long work as jobs: submit, run exactly once, report progress, cancel.

One job code for every runner. A job is a row of ``jobs`` (:mod:`qualplan.store.jobs`)
and a kind from :data:`KINDS` (a function of the session, the submitter and the
parameters). Runners:

- :class:`ThreadRunner`: a background thread of the serving (or CLI) process, for the
  embedded SQLite database;
- :mod:`qualplan.planning.queue`: procrastinate on PostgreSQL, any number of
  ``qualplan worker`` processes on any number of machines sharing the database.

:func:`run_job` is what both call. It claims the row with a conditional UPDATE (a new
claim token), runs the kind in one transaction and stores the result in that same
transaction only while the claim still holds, so the result (and everything the job
wrote) is committed once, even when a lost worker's job is retried elsewhere. Progress
goes to the row in short transactions of its own; a cancellation request is seen at the
next progress report and rolls the job's work back.
"""

from __future__ import annotations

import threading
import time
import traceback
import uuid
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from pydantic import BaseModel, ConfigDict
from sqlalchemy import event, select, update
from sqlalchemy.orm import Session, sessionmaker

from qualplan.planning.access import Actor, require, scope_session
from qualplan.planning.catalog import get
from qualplan.planning.errors import Conflict, PlanningError, ValidationFailed
from qualplan.planning.inputs import Line, Text
from qualplan.store import models as m
from qualplan.store.jobs import Job
from qualplan.store.types import utcnow

Progress = Callable[[float, str], None]

#: Seconds between two progress writes of a running job.
PROGRESS_EVERY_S = 0.5

#: Progress of jobs running in this process on SQLite: job id -> (fraction, phrase). A
#: job's own transaction may hold SQLite's one write lock, so its progress is kept here
#: (the thread runner serves the same process that answers for it) instead of written.
_LIVE: dict[int, tuple[float, str]] = {}
#: Cancellations asked for in this process (seen by the thread runner's jobs at once).
_CANCEL: set[int] = set()


class JobCancelled(Exception):
    """Raised inside a job whose cancellation was asked for."""


@dataclass(frozen=True)
class JobKind:
    """What a job of this kind does and who may submit it."""

    role: m.Role
    run: Callable[[Session, Actor, dict[str, Any], Progress], dict[str, Any]]
    #: Checks the parameters at submission (raises ValidationFailed).
    check: Callable[[Session, dict[str, Any]], None]
    title: str
    #: Submitted only through its own use case (:func:`submit_derivation`,
    #: :func:`submit_document`), never as a bare ``{kind, params}`` (POST /jobs): its
    #: parameters hold what the interface decides (a folder on the server).
    internal: bool = False


KINDS: dict[str, JobKind] = {}

#: Document renderers this process offers to document jobs, by name: ``pdf`` (the
#: specification and the audit report) and ``loads`` (the loads package); each a
#: callable giving a :class:`qualplan.planning.documents.DocumentRenderer`. The
#: interfaces register them (:func:`register_renderers`): planning does not import
#: qualplan.reports.
RENDERERS: dict[str, Callable[[], Any]] = {}


def register_renderers(renderers: dict[str, Callable[[], Any]]) -> None:
    """Offer `renderers` (name -> factory) to the document jobs run by this process."""
    RENDERERS.update(renderers)


def kind(name: str, role: m.Role, title: str, check=None, *, internal: bool = False):
    """Register a job kind (decorator)."""
    def wrap(fn):
        KINDS[name] = JobKind(role, fn, check or (lambda session, params: None), title,
                              internal)
        return fn
    return wrap


class JobRead(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    id: int
    kind: str
    status: str
    progress: float
    phrase: str
    result: dict[str, Any] | None
    error: dict[str, Any] | None
    submitted_by: str
    runner: str
    attempts: int
    cancel_requested: bool
    created_at: datetime
    started_at: datetime | None
    finished_at: datetime | None

    @property
    def done(self) -> bool:
        return self.status in ("succeeded", "failed", "cancelled")


class JobSubmit(BaseModel):
    kind: str
    params: dict[str, Any] = {}


# --- submission, reading, cancelling -----------------------------------------------------


def submit_job(session: Session, actor: Actor, cmd: JobSubmit, *, runner: str,
               internal: bool = False) -> Job:
    """A queued job row (the caller dispatches it once the transaction has committed,
    see :func:`after_commit`). Raises ValidationFailed for an unknown kind or bad
    parameters, PermissionDenied below the kind's role. Kinds marked `internal` are
    refused unless their own use case submits them (``internal=True``)."""
    public = sorted(k for k, v in KINDS.items() if not v.internal)
    if cmd.kind not in KINDS or (KINDS[cmd.kind].internal and not internal):
        raise ValidationFailed("kind", cmd.kind, f"must be one of {public}")
    k = KINDS[cmd.kind]
    require(actor, k.role, f"submitting a {cmd.kind} job")
    k.check(session, cmd.params)
    job = Job(kind=cmd.kind, params={**cmd.params, "_role": actor.role.value,
                                     "_user_id": actor.user_id},
              status="queued", progress=0.0, phrase="waiting for a worker",
              submitted_by=actor.name, runner=runner, attempts=0, cancel_requested=False,
              created_at=utcnow())
    session.add(job)
    session.flush()
    return job


def read_job(session: Session, job_id: int) -> JobRead:
    out = JobRead.model_validate(get(session, Job, job_id, "job"))
    live = _LIVE.get(job_id)
    if live is not None and out.status == "running":
        out.progress, out.phrase = live
    return out


def queue_depth(session: Session) -> dict[str, int]:
    """Jobs queued and running (for the metrics and the health check)."""
    rows = session.execute(select(Job.status).where(Job.status.in_(("queued", "running"))))
    out = {"queued": 0, "running": 0}
    for (status,) in rows:
        out[status] += 1
    return out


def recent_durations(session: Session, hours: float = 1.0) -> dict[str, float]:
    """Mean run time [s] of the jobs finished in the last `hours`, by kind."""
    since = utcnow() - timedelta(hours=hours)
    rows = session.execute(select(Job.kind, Job.started_at, Job.finished_at).where(
        Job.finished_at >= since, Job.started_at.is_not(None)))
    sums: dict[str, list[float]] = {}
    for kind_name, start, end in rows:
        sums.setdefault(kind_name, []).append((end - start).total_seconds())
    return {k: sum(v) / len(v) for k, v in sums.items()}


def cancel_job(session: Session, actor: Actor, job_id: int) -> Job:
    """Cancel a queued job at once; ask a running one to stop at its next progress report.
    Conflict for a job already done."""
    job = get(session, Job, job_id, "job")
    if job.submitted_by != actor.name:
        require(actor, m.Role.admin, "cancelling another user's job")
    if job.status in ("succeeded", "failed", "cancelled"):
        raise Conflict(f"job {job_id} is already {job.status}")
    if job.status == "queued":
        job.status, job.phrase, job.finished_at = "cancelled", "cancelled", utcnow()
    elif job.runner == ThreadRunner.name:
        _CANCEL.add(job.id)
    job.cancel_requested = True
    session.flush()
    return job


def after_commit(session: Session, fn: Callable[[], None]) -> None:
    """Call `fn` once, after `session`'s transaction has committed (never on rollback)."""
    event.listen(session, "after_commit", lambda _session: fn(), once=True)


# --- running ---------------------------------------------------------------------------


def _error(exc: BaseException) -> dict[str, Any]:
    if isinstance(exc, ValidationFailed):
        return {"title": "Invalid input", "detail": f"{exc.field} = {exc.value!r}: {exc.rule}",
                "field": exc.field, "value": repr(exc.value)}
    if isinstance(exc, PlanningError):
        return {"title": type(exc).__name__, "detail": str(exc)}
    return {"title": "Unexpected error", "detail": f"{type(exc).__name__}: {exc}",
            "trace": traceback.format_exc(limit=5)[-2000:]}


def run_job(factory: sessionmaker[Session], job_id: int, *, worker: str = "") -> str:
    """Claim job `job_id`, run it, store its outcome once; returns the final status
    (or ``"skipped"`` when the job was done, cancelled or claimed by a newer attempt)."""
    token = uuid.uuid4().hex
    with factory() as s, s.begin():
        claimed = s.execute(
            update(Job).where(Job.id == job_id, Job.status.in_(("queued", "running")),
                              Job.cancel_requested.is_(False))
            .values(status="running", claim=token, attempts=Job.attempts + 1,
                    started_at=utcnow(), worker=worker, phrase="starting")
            .execution_options(synchronize_session=False)).rowcount
    if not claimed:
        return "skipped"
    with factory() as s:
        job = s.get(Job, job_id)
        kind_name, params, who = job.kind, dict(job.params), job.submitted_by
    # the submitter, with its memberships: the job sees and may change what it may
    actor = Actor(who, m.Role(params.pop("_role", m.Role.viewer.value)),
                  user_id=params.pop("_user_id", None))
    params["_job_id"] = job_id  # for the links a kind puts in its result
    last = [0.0]
    in_memory = factory.kw["bind"].dialect.name == "sqlite"

    def progress(fraction: float, phrase: str) -> None:
        if job_id in _CANCEL:
            raise JobCancelled
        now = time.monotonic()
        if now - last[0] < PROGRESS_EVERY_S:
            return
        last[0] = now
        with factory() as s, s.begin():
            row = s.execute(select(Job.cancel_requested, Job.claim)
                            .where(Job.id == job_id)).one()
            if row.cancel_requested:
                raise JobCancelled
            if row.claim != token:
                raise JobCancelled  # a newer attempt holds the job
            if in_memory:
                _LIVE[job_id] = (min(1.0, max(0.0, float(fraction))), phrase[:200])
                return
            s.execute(update(Job).where(Job.id == job_id, Job.claim == token)
                      .values(progress=min(1.0, max(0.0, float(fraction))),
                              phrase=phrase[:200])
                      .execution_options(synchronize_session=False))

    def finish(values: dict[str, Any], session: Session | None = None) -> bool:
        def do(s: Session) -> bool:
            return bool(s.execute(
                update(Job).where(Job.id == job_id, Job.claim == token,
                                  Job.status == "running")
                .values(finished_at=utcnow(), **values)
                .execution_options(synchronize_session=False)).rowcount)
        if session is not None:
            return do(session)
        with factory() as s, s.begin():
            return do(s)

    try:
        with factory() as s:
            try:
                scope_session(s, actor)
                result = KINDS[kind_name].run(s, actor, params, progress)
                # the outcome in the job's own transaction: stored once, with its writes
                if not finish({"status": "succeeded", "result": result, "progress": 1.0,
                               "phrase": "done"}, s):
                    s.rollback()
                    return "skipped"
                s.commit()
                return "succeeded"
            except BaseException:
                s.rollback()
                raise
    except JobCancelled:
        finish({"status": "cancelled", "phrase": "cancelled"})
        return "cancelled"
    except Exception as exc:  # noqa: BLE001 - every failure is reported on the job
        finish({"status": "failed", "error": _error(exc), "phrase": "failed"})
        return "failed"
    finally:
        _LIVE.pop(job_id, None)
        _CANCEL.discard(job_id)


class ThreadRunner:
    """Jobs in background threads of this process (the embedded SQLite database)."""

    name = "thread"

    def __init__(self, factory: sessionmaker[Session], threads: int = 1) -> None:
        self.factory = factory
        self._pool = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="qualplan-job")
        self._lock = threading.Lock()

    def dispatch(self, job_id: int):
        with self._lock:
            return self._pool.submit(run_job, self.factory, job_id,
                                     worker=f"thread in process {threading.get_native_id()}")

    def ready(self) -> bool:
        return True

    def close(self) -> None:
        self._pool.shutdown(wait=True)


def wait_for(factory: sessionmaker[Session], job_id: int, *, poll_s: float = 0.25,
             timeout_s: float | None = None, show: Progress | None = None) -> JobRead:
    """Poll a job until it is done (`show(fraction, phrase)` at each poll)."""
    start = time.monotonic()
    while True:
        with factory() as s:
            job = read_job(s, job_id)
        if show is not None:
            show(job.progress, job.phrase)
        if job.done:
            return job
        if timeout_s is not None and time.monotonic() - start > timeout_s:
            return job
        time.sleep(poll_s)


# --- the kinds -------------------------------------------------------------------------


def _check_analysis(session: Session, params: dict[str, Any]) -> None:
    from qualplan.planning import records

    rid = params.get("revision_id")
    if not isinstance(rid, int):
        raise ValidationFailed("params.revision_id", rid, "must be a record's revision id")
    records.read_record(session, rid)
    res = params.get("resolution_hz", 5.0)
    if not isinstance(res, int | float) or not 0 < res < 1e6:
        raise ValidationFailed("params.resolution_hz", res, "must be a number above 0 Hz")


@kind("record_analysis", m.Role.viewer, "Welch PSD and statistics of a stored record",
      _check_analysis)
def _record_analysis(session: Session, actor: Actor, params: dict[str, Any],
                     progress: Progress) -> dict[str, Any]:
    """Welch PSD (Welch 1967; Bendat & Piersol 2010, ch. 11) and the statistics of every
    channel of a stored record, read chunk by chunk (qualplan.dynamics.streaming)."""
    from qualplan.dynamics import streaming
    from qualplan.planning import records

    res = float(params.get("resolution_hz", 5.0))
    out = records.analyse_record(
        session, params["revision_id"],
        lambda fs: {"welch": streaming.WelchStream(fs, resolution_hz=res),
                    "stats": streaming.StatsStream(fs)}, progress=progress)
    channels = []
    for ch in out:
        w, st = ch.results["welch"], ch.results["stats"]
        channels.append({
            "name": ch.name, "axis": ch.axis,
            "welch": {"grms": {"value": w.grms, "unit": "g rms"},
                      "resolution_hz": w.resolution_hz, "n_segments": w.n_segments,
                      "dof": w.dof, "freq_hz": w.freq_hz.tolist(),
                      "asd_g2_hz": w.asd_g2_hz.tolist(), "unit": "g^2/Hz"},
            "rms": {"value": st.rms_g, "unit": "g rms"},
            "peak": {"value": st.peak_g, "unit": "g"},
        })
    return {"revision_id": params["revision_id"], "channels": channels}


def _check_import(session: Session, params: dict[str, Any]) -> None:
    from qualplan.planning import records

    for key in ("path", "filename"):
        if not isinstance(params.get(key), str) or not params[key]:
            raise ValidationFailed(f"params.{key}", params.get(key), "is required")
    records.RecordImport.model_validate(params.get("record") or {})
    records.record_options(params["filename"],
                           records.RecordReading.model_validate(params.get("reading") or {}))


@kind("record_import", m.Role.engineer, "Import of a long record in chunks", _check_import)
def _record_import(session: Session, actor: Actor, params: dict[str, Any],
                   progress: Progress) -> dict[str, Any]:
    """Import a record file the worker can read (a path on a shared or the same disk)."""
    from qualplan.planning import records

    cmd = records.RecordImport.model_validate(params["record"])
    how = records.RecordReading.model_validate(params.get("reading") or {})
    src = records.open_record_file(params["path"],
                                   **records.record_options(params["filename"], how))
    rec = records.import_record(session, actor, cmd, src, progress=progress)
    return {"environment_id": rec.environment_id, "revision": rec.revision,
            "revision_id": rec.revision_id, "n_samples": rec.n_samples,
            "channels": [c.name for c in rec.channels], "content_hash": rec.content_hash}


# --- derivations (and the equivalence of many inputs) ------------------------------------


def _recipe(params: dict[str, Any]):
    from pydantic import ValidationError

    from qualplan.planning import schemas as s

    try:
        return s.LevelRecipe.model_validate(params.get("recipe"))
    except ValidationError as exc:
        err = exc.errors()[0]
        field = ".".join(["params", "recipe", *(str(x) for x in err["loc"])])
        raise ValidationFailed(field, err.get("input"), err["msg"]) from None


def _check_derive(session: Session, params: dict[str, Any]) -> None:
    _recipe(params)


@kind("level_derive", m.Role.engineer, "Derivation of a level (an envelope, P95/50, or the "
      "FDS-equivalent PSD of many inputs) with its FDS/ERS coverage", _check_derive)
def _level_derive(session: Session, actor: Actor, params: dict[str, Any],
                  progress: Progress) -> dict[str, Any]:
    """:func:`qualplan.planning.levels.derive_level` as a job (the methods are its)."""
    from qualplan.planning import levels

    level = levels.derive_level(session, actor, _recipe(params), progress=progress)
    progress(0.99, f"stored {level.name} #{level.number}")
    return {"level_id": level.id, "name": level.name, "number": level.number,
            "kind": level.kind.value, "axis": level.axis.value,
            "level_hash": level.level_hash,
            "links": {"level": f"/api/v1/levels/{level.id}", "page": f"/levels/{level.id}"}}


def submit_derivation(session: Session, actor: Actor, recipe, *, runner: str) -> Job:
    """Queue the derivation of `recipe` (a :class:`~qualplan.planning.schemas.LevelRecipe`),
    refused at once for an unknown product or policy or a caller without the engineer
    role on the product; the derivation itself runs in the job."""
    from qualplan.planning import levels

    levels.check_recipe(session, actor, recipe)
    return submit_job(session, actor, JobSubmit(
        kind="level_derive", params={"recipe": recipe.model_dump(mode="json")}),
        runner=runner)


# --- documents -------------------------------------------------------------------------


class DocumentJob(BaseModel):
    """A document to issue as a job: the test-level ``specification`` or the ``loads``
    package of a product, or the ``audit`` report of a program (or a product subtree)."""

    model_config = ConfigDict(extra="forbid")

    document: str
    product_id: int | None = None
    program_id: int | None = None
    grade: str = "qualification"
    level_ids: list[int] | None = None
    axis: str | None = None
    number: Line | None = None
    note: Text = ""
    #: The folder the files are written to: the CLI's --out, or the serving process's
    #: ``job_files_dir`` (shared with the workers) for the API and the web.
    out_dir: str
    figures: bool = False


DOCUMENTS = {"specification": "pdf", "audit": "pdf", "loads": "loads"}


def _document(params: dict[str, Any]) -> DocumentJob:
    from pydantic import ValidationError

    try:
        doc = DocumentJob.model_validate(
            {k: v for k, v in params.items() if not k.startswith("_")})
    except ValidationError as exc:
        err = exc.errors()[0]
        field = ".".join(["params", *(str(x) for x in err["loc"])])
        raise ValidationFailed(field, err.get("input"), err["msg"]) from None
    if doc.document not in DOCUMENTS:
        raise ValidationFailed("params.document", doc.document,
                               f"must be one of {sorted(DOCUMENTS)}")
    if doc.document == "specification" and doc.grade not in {g.value for g in m.Grade}:
        raise ValidationFailed("params.grade", doc.grade,
                               f"must be one of {[g.value for g in m.Grade]}")
    if doc.document == "audit" and doc.program_id is None:
        raise ValidationFailed("params.program_id", None, "is required for an audit report")
    if doc.document != "audit" and doc.product_id is None:
        raise ValidationFailed("params.product_id", None,
                               f"is required for a {doc.document} document")
    return doc


def _check_document(session: Session, params: dict[str, Any]) -> None:
    _document(params)


def document_content(session: Session, doc: DocumentJob):
    """The content of the document `doc` names (planning.documents / planning.loads)."""
    from qualplan.planning import documents, loads

    if doc.document == "specification":
        return documents.specification_content(session, doc.product_id, doc.grade,
                                              level_ids=doc.level_ids, number=doc.number,
                                              note=doc.note)
    if doc.document == "audit":
        return documents.audit_content(session, doc.program_id, doc.product_id,
                                       number=doc.number, note=doc.note)
    return loads.loads_content(session, doc.product_id,
                               axis=m.Axis(doc.axis) if doc.axis else None,
                               level_ids=doc.level_ids, number=doc.number, note=doc.note)


@kind("document_issue", m.Role.engineer, "Issue of a document (specification, audit report "
      "or loads package): content, rendering and the recorded revision", _check_document,
      internal=True)
def _document_issue(session: Session, actor: Actor, params: dict[str, Any],
                    progress: Progress) -> dict[str, Any]:
    """Build, render and record a document (:func:`qualplan.planning.documents.issue_document`)."""
    from pathlib import Path

    from qualplan.planning import documents

    doc = _document(params)
    name = DOCUMENTS[doc.document]
    if name not in RENDERERS:
        raise ValidationFailed("params.document", doc.document,
                               f"this process has no {name} renderer (a worker started "
                               "with `qualplan worker` has them)")
    progress(0.05, f"building the content of the {doc.document} document")
    content = document_content(session, doc)
    progress(0.3, f"rendering {content.number} revision {content.revision}")
    renderer = (RENDERERS[name](figures=doc.figures) if name == "pdf"
                else RENDERERS[name]())
    issued = documents.issue_document(session, actor, content, renderer, Path(doc.out_dir))
    progress(0.95, f"recording {issued.number} revision {issued.revision}")
    job_id = params.get("_job_id")
    out = {"document_id": issued.document_id, "document": doc.document,
           "number": issued.number, "revision": issued.revision,
           "content_hash": issued.content_hash, "new_revision": issued.new_revision,
           "out_dir": str(Path(doc.out_dir).resolve()),
           "files": [p.name for p in issued.files],
           "links": {"document": f"/api/v1/documents?product_id={content.product_id}"
                     if content.product_id else "/api/v1/documents",
                     "files": [f"/api/v1/jobs/{job_id}/files/{p.name}" for p in issued.files]}}
    if doc.document == "audit":
        out["release_ready"] = content.release_ready
        out["verdict"] = content.verdict
    return out


def submit_document(session: Session, actor: Actor, doc: DocumentJob, *, runner: str) -> Job:
    """Queue the issue of a document, refused at once for an unknown product or program,
    or a caller without the engineer role in its program."""
    from qualplan.planning.access import require_for, require_in

    _document(doc.model_dump())
    if doc.document == "audit":
        get(session, m.Program, doc.program_id, "program")
        require_in(session, actor, doc.program_id, m.Role.engineer, "issuing a document")
    else:
        require_for(session, actor, get(session, m.Product, doc.product_id, "product"),
                    m.Role.engineer, "issuing a document")
    return submit_job(session, actor, JobSubmit(kind="document_issue",
                                                params=doc.model_dump(mode="json")),
                      runner=runner, internal=True)


def job_file(session: Session, job_id: int, name: str):
    """The path of file `name` a succeeded document job wrote (NotFound otherwise)."""
    from pathlib import Path

    from qualplan.planning.errors import NotFound

    job = read_job(session, job_id)
    result = job.result or {}
    if job.status != "succeeded" or name not in result.get("files", []):
        raise NotFound(f"file of job {job_id}", name)
    path = Path(result["out_dir"]) / name
    if not path.is_file():
        # the job files folder must be shared with the workers (docs/deploy.md)
        raise NotFound(f"file of job {job_id} on this machine", str(path))
    return path
