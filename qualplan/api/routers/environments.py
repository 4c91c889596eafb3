"""Environments and their immutable revisions: create, read, list, revise, compare."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, File, Form, Query, Request, Response, UploadFile

from qualplan.api.deps import (
    ActorDep,
    OptionalVersionDep,
    PageDep,
    ReaderDep,
    SessionDep,
    etag,
)
from qualplan.api.errors import Problem
from qualplan.api.limits import too_large_detail
from qualplan.api.models import Page
from qualplan.api.responses import json_response
from qualplan.planning import approvals, impact, records
from qualplan.planning import environments as envs
from qualplan.planning import schemas as s

router = APIRouter(tags=["environments"])


def _environment(session, environment_id: int):
    return envs.environment_by_id(session, environment_id)


def _read(session, env, response: Response | None = None) -> s.EnvironmentRead:
    # one environment (not a page of them) comes with its life-cycle warnings
    out = envs.read_environment(session, env, with_warnings=response is not None)
    if response is not None and out.latest_revision is not None:
        response.headers["ETag"] = etag(out.latest_revision)
    return out


@router.post("/environments", status_code=201, response_model=s.EnvironmentRead)
def create_environment(
    cmd: s.EnvironmentCreate, session: SessionDep, actor: ActorDep, response: Response
):
    """Create an environment with its first revision (the data of `cmd.data`)."""
    return _read(session, envs.create_environment(session, actor, cmd), response)


@router.post("/environments/{environment_id}/withdrawal", status_code=201,
             response_model=s.WithdrawalRead)
def withdraw_environment(environment_id: int, cmd: s.WithdrawIn, session: SessionDep,
                         actor: ActorDep):
    """Withdraw an environment (engineer or higher), with a reason: it leaves the life
    cycle, the derivations and the default baselines; what used it becomes stale."""
    return s.WithdrawalRead.model_validate(
        approvals.withdraw_environment(session, actor, environment_id, cmd.reason))


@router.get("/environments", response_model=Page[s.EnvironmentRead])
def list_environments(
    session: SessionDep,
    _: ReaderDep,
    page: PageDep,
    product_id: int | None = None,
    kind: s.EnvironmentKind | None = None,
    axis: s.Axis | None = None,
    include_parents: bool = False,
):
    """Environments, filtered; with `product_id` and `include_parents=true`, also the
    parents' environments that apply to the product (see /products/{id}/environments for
    where each came from)."""
    if include_parents and product_id is not None:
        from qualplan.planning.transfers import environments_for

        rows = [envs.environment_by_id(session, o.id) for o in
                environments_for(session, product_id) if o.origin != "replaced"
                and (kind is None or o.kind is kind) and (axis is None or o.axis is axis)]
    else:
        rows = envs.list_environments(session, product_id=product_id, kind=kind, axis=axis)
    items = [_read(session, r) for r in page.window(rows)]
    return Page(items=items, total=len(rows), offset=page.offset, limit=page.limit)


@router.get("/environments/{environment_id}", response_model=s.EnvironmentRead)
def get_environment(environment_id: int, session: SessionDep, _: ReaderDep):
    """The environment; its ETag is the number of its latest revision."""
    out = envs.environment_read(session, environment_id)
    return json_response(out, etag=None if out.latest_revision is None
                         else etag(out.latest_revision))


@router.get("/environments/{environment_id}/impact", response_model=impact.Impact)
def environment_impact(environment_id: int, session: SessionDep, _: ReaderDep):
    """The levels, requirements and documents a new revision of the environment would
    make stale (or, once revised, has made stale)."""
    return impact.environment_impact(session, environment_id)


@router.get(
    "/environments/{environment_id}/revisions", response_model=Page[s.RevisionRead]
)
def list_revisions(environment_id: int, session: SessionDep, _: ReaderDep, page: PageDep):
    rows = envs.history(session, environment_id)
    return json_response(Page[s.RevisionRead](items=page.window(rows), total=len(rows),
                                              offset=page.offset, limit=page.limit))


@router.post(
    "/environments/{environment_id}/revisions", status_code=201, response_model=s.RevisionRead
)
def add_revision(
    environment_id: int,
    cmd: s.RevisionIn,
    session: SessionDep,
    actor: ActorDep,
    version: OptionalVersionDep,
    response: Response,
):
    """Add a revision (the whole data). The revision replaced goes in
    ``expected_revision`` or in If-Match; a newer one in store answers 412."""
    if version is not None:
        if cmd.expected_revision is not None and cmd.expected_revision != version:
            raise Problem(
                422,
                "invalid-input",
                "Invalid input",
                "If-Match and expected_revision name different revisions",
                field="expected_revision",
                value=cmd.expected_revision,
            )
        cmd = cmd.model_copy(update={"expected_revision": version})
    # the environment held here stays in the session's identity map (a weak one): the
    # use case finds it there, and it is not read again for its kind below
    env = _environment(session, environment_id)
    rev = envs.revise_environment(session, actor, env.id, cmd)
    response.headers["ETag"] = etag(rev.number)
    return envs.read_revision(rev, env.kind)


@router.get("/environments/{environment_id}/compare", response_model=s.RevisionComparison)
def compare(
    environment_id: int,
    session: SessionDep,
    _: ReaderDep,
    a: Annotated[int, Query(ge=1, description="Revision number")],
    b: Annotated[int, Query(ge=1, description="Revision number")],
):
    """Overall measures of revisions `a` and `b` and their largest difference [dB]."""
    return envs.compare(session, environment_id, a, b)


# --- uploads ------------------------------------------------------------------------------

FileIn = Annotated[UploadFile, File(description=".json or .csv table; records .csv .npy .wav ...")]
#: Further files of the same upload: runs of one condition (measured spectra or records at
#: one sample rate), stored in one revision with the exposure counted once.
RunsIn = Annotated[list[UploadFile] | None, File(
    description="Further runs of the same condition (same kind and sample rate)")]


def _more(runs: list[UploadFile] | None) -> list[tuple[str, bytes]]:
    return [(f.filename or "upload", f.file.read()) for f in runs or []]


UnitsIn = Annotated[
    str | None,
    Form(description="Units of the file's values: g^2/Hz, (m/s^2)^2/Hz, g or m/s^2"),
]


class RecordForm:
    """How to read an uploaded file (multipart fields beside `file`)."""

    def __init__(
        self,
        value_units: UnitsIn = None,
        freq_units: Annotated[str, Form(description="Hz or kHz (tables)")] = "Hz",
        sample_rate_hz: Annotated[
            float | None,
            Form(gt=0, allow_inf_nan=False, description="Of a one-column or .npy record [Hz]"),
        ] = None,
        calibration: Annotated[
            float | None,
            Form(gt=0, allow_inf_nan=False, description="Of a .wav record: units per full scale"),
        ] = None,
        variable: Annotated[str | None, Form(description="Of a .mat file")] = None,
        dataset: Annotated[str | None, Form(description="Of an HDF5 record")] = None,
        channel_axes: Annotated[str | None, Form(
            description="A long multi-channel record stored in chunks: one axis per channel "
            "in file order, e.g. X,Y,Z (kind time_history; the record upload limit "
            "applies)")] = None,
        share: Annotated[float | None, Form(
            allow_inf_nan=False,
            description="Fraction of the phase's time the environment lasts, 0 < share <= 1 "
            "(default 1; docs/methods/exposure.md)")] = None,
        duration_s: Annotated[float | None, Form(
            allow_inf_nan=False,
            description="Duration per occurrence of the phase [s]: a spectrum's, or a record "
            "repeated to fill it")] = None,
        count: Annotated[int | None, Form(
            description="Shock events per occurrence of the phase (default 1)")] = None,
    ) -> None:
        self.value_units, self.freq_units = value_units, freq_units
        self.sample_rate_hz, self.calibration, self.variable = (
            sample_rate_hz,
            calibration,
            variable,
        )
        self.dataset = dataset or None
        self.channel_axes = (channel_axes or "").strip() or None
        self.exposure = {"share": share, "duration_s": duration_s, "count": count}
        if self.channel_axes is not None:
            records.refuse_exposure(self.exposure)

    def record_reading(self) -> records.RecordReading:
        return records.RecordReading(unit=self.value_units, fs_hz=self.sample_rate_hz,
                                     calibration=self.calibration, variable=self.variable,
                                     dataset=self.dataset)


RecordFormDep = Annotated[RecordForm, Depends()]


def _ordinary_size(request: Request, file: UploadFile) -> None:
    """A file that is not a chunked record keeps the ordinary upload limit (413)."""
    limit = request.app.state.settings.max_upload_bytes
    if file.size is not None and file.size > limit:
        raise Problem(413, "too-large", "Content too large",
                      too_large_detail(limit, "QUALPLAN_MAX_UPLOAD_BYTES")
                      + "; a long record is stored in chunks when channel_axes is given",
                      field="body", value=f"{file.size} bytes",
                      extra={"limit_bytes": limit})


def _reading(how: RecordForm) -> s.FileReading:
    return s.FileReading(value_units=how.value_units, freq_units=how.freq_units,
                         sample_rate_hz=how.sample_rate_hz, calibration=how.calibration,
                         variable=how.variable, **how.exposure)


@router.post("/environments/upload", status_code=201, response_model=s.EnvironmentRead)
def upload_environment(
    request: Request,
    session: SessionDep,
    actor: ActorDep,
    response: Response,
    file: FileIn,
    product_id: Annotated[int, Form()],
    name: Annotated[str, Form(min_length=1, max_length=200)],
    kind: Annotated[s.EnvironmentKind, Form()],
    axis: Annotated[s.Axis, Form()],
    phase_id: Annotated[int | None, Form()] = None,
    source: Annotated[str, Form()] = "",
    provenance: Annotated[str, Form()] = "",
    note: Annotated[str, Form()] = "",
    how: RecordFormDep = None,  # type: ignore[assignment]
    runs: RunsIn = None,
):
    """Create an environment from an uploaded file (multipart), within the upload limit;
    `runs`: further files, runs of the same condition in the same revision.

    With `channel_axes`, the file is a long multi-channel record (kind time_history):
    it is read in chunks and stored in chunks, within the record upload limit."""
    if how.channel_axes is not None:
        if kind is not s.EnvironmentKind.time_history:
            raise Problem(422, "invalid", "Invalid input", "channel_axes is for a record: "
                          "give kind time_history", field="channel_axes",
                          value=how.channel_axes)
        rec = records.import_record_upload(
            session, actor, records.RecordImport(
                product_id=product_id, phase_id=phase_id, name=name,
                channel_axes=records.parse_axes(how.channel_axes), source=source,
                provenance=provenance or f"uploaded file {file.filename}", note=note),
            file.filename or "upload", file.file, how.record_reading())
        return _read(session, _environment(session, rec.environment_id), response)
    _ordinary_size(request, file)
    cmd = s.EnvironmentFromFile(
        product_id=product_id, phase_id=phase_id, name=name, kind=kind, axis=axis,
        source=source, provenance=provenance, note=note, reading=_reading(how))
    env = envs.create_environment_from_file(session, actor, cmd, file.filename or "upload",
                                            file.file.read(), more_files=_more(runs))
    return _read(session, env, response)


@router.post(
    "/environments/{environment_id}/revisions/upload",
    status_code=201,
    response_model=s.RevisionRead,
)
def upload_revision(
    request: Request,
    environment_id: int,
    session: SessionDep,
    actor: ActorDep,
    version: OptionalVersionDep,
    response: Response,
    file: FileIn,
    note: Annotated[str, Form()] = "",
    expected_revision: Annotated[int | None, Form()] = None,
    how: RecordFormDep = None,  # type: ignore[assignment]
    runs: RunsIn = None,
):
    """Add a revision from an uploaded file; If-Match or `expected_revision` as for JSON;
    `runs`: further files, runs of the same condition.

    With `channel_axes`, the file is a long record stored in chunks (see the upload of a
    new environment)."""
    env = _environment(session, environment_id)
    if how.channel_axes is not None:
        rec = records.import_record_upload(
            session, actor, records.RecordImport(
                environment_id=environment_id,
                expected_revision=version if version is not None else expected_revision,
                channel_axes=records.parse_axes(how.channel_axes), note=note),
            file.filename or "upload", file.file, how.record_reading())
        response.headers["ETag"] = etag(rec.revision)
        return envs.read_revision(envs.revision(session, environment_id, rec.revision),
                                  env.kind)
    _ordinary_size(request, file)
    rev = envs.revise_environment_from_file(
        session, actor, environment_id, file.filename or "upload", file.file.read(),
        _reading(how), note=note,
        expected_revision=version if version is not None else expected_revision,
        more_files=_more(runs))
    response.headers["ETag"] = etag(rev.number)
    return envs.read_revision(rev, env.kind)
