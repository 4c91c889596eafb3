"""Environments and their immutable revisions: create, revise, list history, compare."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session, joinedload

from qualplan.dynamics.srs import octave_grid
from qualplan.planning import envdata, lifecycle
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require_for, require_in
from qualplan.planning.catalog import _add_unique, check_id, get
from qualplan.planning.errors import Conflict, NotFound, ValidationFailed, VersionMismatch
from qualplan.planning.withdrawals import describe, environment_withdrawal
from qualplan.store import models as m
from qualplan.store.hashing import revision_hash
from qualplan.store.repositories import EnvironmentRepository, RevisionRepository


def create_environment(
    session: Session, actor: Actor, cmd: s.EnvironmentCreate, array: np.ndarray | None = None
) -> m.Environment:
    """Create an environment with its first revision (data validated for its kind)."""
    product = get(session, m.Product, cmd.product_id, "product")
    require_for(session, actor, product, m.Role.engineer, "creating an environment")
    if cmd.phase_id is not None:
        phase = get(session, m.Phase, cmd.phase_id, "phase")
        if phase.program_id != product.program_id:
            raise ValidationFailed("phase_id", cmd.phase_id, "the phase belongs to another program")
    spec, data = envdata.normalise(cmd.kind, cmd.data, array)
    if cmd.phase_id is not None:
        envdata.check_exposure(cmd.kind, spec, None if data is None else data.size,
                               phase.name, phase.duration_s)
    env = _add_unique(
        session,
        m.Environment(
            product_id=cmd.product_id,
            phase_id=cmd.phase_id,
            name=cmd.name,
            kind=cmd.kind,
            axis=cmd.axis,
            units=envdata.UNITS[cmd.kind],
            source=cmd.source,
            provenance=cmd.provenance,
        ),
        f"environment {cmd.name!r} of product {product.name!r}",
    )
    _append_revision(session, actor, env, spec, data, cmd.note or "first revision")
    record(
        session,
        actor,
        "create",
        "environment",
        env.id,
        name=cmd.name,
        kind=env.kind.value,
        axis=env.axis.value,
    )
    return env


def _one_file(kind: m.EnvironmentKind, filename: str, content: bytes,
              how: s.FileReading) -> tuple[dict[str, Any], np.ndarray | None]:
    from qualplan.planning import imports

    return imports.environment_data_from_file(
        kind, filename or "upload", content, value_units=how.value_units,
        freq_units=how.freq_units, sample_rate_hz=how.sample_rate_hz,
        calibration=how.calibration, variable=how.variable)


#: FileReading fields that are the environment's part of its phase, stored with the data
EXPOSURE_FIELDS = ("share", "duration_s", "count")


def _file_data(kind: m.EnvironmentKind, filename: str, content: bytes, how: s.FileReading,
               more: Sequence[tuple[str, bytes]] = ()
               ) -> tuple[dict[str, Any], np.ndarray | None]:
    """The data of one file, or of several files as runs of one condition (measured
    spectra or records at one sample rate; docs/methods/exposure.md), with the exposure
    the reading states (share, duration_s, count; checked with the data)."""
    data, array = _files_data(kind, filename, content, how, more)
    return with_exposure(data, **{k: getattr(how, k) for k in EXPOSURE_FIELDS}), array


def with_exposure(data: dict[str, Any], *, share: float | None = None,
                  duration_s: float | None = None, count: int | None = None
                  ) -> dict[str, Any]:
    """`data` with the exposure given beside it (an option, a form field) merged in; the
    same value given in the data and beside them is refused, never overwritten."""
    for key, value in (("share", share), ("duration_s", duration_s), ("count", count)):
        if value is None:
            continue
        if data.get(key) is not None and data[key] != value:
            raise ValidationFailed(key, value, f"the data state {key} = {data[key]!r}; "
                                   "give it in one place")
        data = {**data, key: value}
    return data


def _files_data(kind: m.EnvironmentKind, filename: str, content: bytes, how: s.FileReading,
                more: Sequence[tuple[str, bytes]] = ()
                ) -> tuple[dict[str, Any], np.ndarray | None]:
    files = [(filename, content), *more]
    if len(files) == 1:
        return _one_file(kind, filename, content, how)
    if kind not in (m.EnvironmentKind.random, m.EnvironmentKind.time_history):
        raise ValidationFailed("file", [f for f, _ in files],
                               f"several files are runs of one condition: measured spectra "
                               f"or records, not {kind.value} data")
    read = []
    for name, body in files:
        if not name:
            raise ValidationFailed("file", None, "choose a file to upload")
        read.append((name, *_one_file(kind, name, body, how)))
    if kind is m.EnvironmentKind.random:
        runs = []
        for name, data, _ in read:
            if "runs" in data or set(data) - {"freq_hz", "asd_g2_hz"}:
                raise ValidationFailed("file", name, "a run file holds one spectrum (freq_hz, "
                                       "asd_g2_hz) and nothing else")
            runs.append(data)
        return {"runs": runs}, None
    dts, arrays = [], []
    for name, data, array in read:
        spec, samples = envdata.normalise(kind, data, array)
        if "run_samples" in spec:
            raise ValidationFailed("file", name, "a run file holds one record")
        dts.append((name, spec["dt_s"]))
        arrays.append(samples)
    first = dts[0][1]
    for name, dt in dts[1:]:
        if abs(dt - first) > 1e-9 * first:
            raise ValidationFailed("file", name, f"sampled at {1 / dt:.6g} Hz, the first run "
                                   f"({dts[0][0]}) at {1 / first:.6g} Hz; runs of one "
                                   "revision share one sample rate")
    return ({"dt_s": first, "run_samples": [int(a.size) for a in arrays]},
            np.concatenate(arrays))


def create_environment_from_file(session: Session, actor: Actor, cmd: s.EnvironmentFromFile,
                                 filename: str, content: bytes, *,
                                 more_files: Sequence[tuple[str, bytes]] = ()
                                 ) -> m.Environment:
    """Create an environment from a file's content (the one use case behind the API's
    upload, the web form and ``qualplan env add --file``); with `more_files`, the files
    are runs of one condition in one revision."""
    product = get(session, m.Product, cmd.product_id, "product")
    require_for(session, actor, product, m.Role.engineer, "creating an environment")
    if not filename:
        raise ValidationFailed("file", None, "choose a file to upload")
    data, array = _file_data(cmd.kind, filename, content, cmd.reading, more_files)
    create = s.EnvironmentCreate(
        product_id=cmd.product_id, phase_id=cmd.phase_id, name=cmd.name, kind=cmd.kind,
        axis=cmd.axis, source=cmd.source,
        provenance=cmd.provenance or f"uploaded file {filename}", data=data, note=cmd.note)
    return create_environment(session, actor, create, array)


def revise_environment_from_file(session: Session, actor: Actor, environment_id: int,
                                 filename: str, content: bytes, how: s.FileReading, *,
                                 note: str = "", expected_revision: int | None = None,
                                 more_files: Sequence[tuple[str, bytes]] = ()
                                 ) -> m.EnvironmentRevision:
    """A new revision read from a file's content (API upload, web form, CLI); with
    `more_files`, the files are runs of one condition."""
    if not filename:
        raise ValidationFailed("file", None, "choose a file to upload")
    env = get(session, m.Environment, environment_id, "environment")
    require_for(session, actor, env, m.Role.engineer, "revising an environment")
    data, array = _file_data(env.kind, filename, content, how, more_files)
    return revise_environment(session, actor, env.id, s.RevisionIn(
        data=data, note=note, expected_revision=expected_revision), array)


def revise_environment(
    session: Session,
    actor: Actor,
    environment_id: int,
    cmd: s.RevisionIn,
    array: np.ndarray | None = None,
) -> m.EnvironmentRevision:
    """Add a revision; refuse an identical content and a stale `expected_revision`."""
    env = get(session, m.Environment, environment_id, "environment")
    # its program (for the role check) and its phase (for the exposure check) as three
    # columns of one statement: no product or phase row loaded
    where = EnvironmentRepository(session).program_and_phase(env.id)
    if where is None:
        raise NotFound("environment", environment_id)
    program_id, phase_name, phase_duration_s = where
    require_in(session, actor, program_id, m.Role.engineer, "revising an environment")
    # take the environment's turn first: the latest revision read next is the last
    # committed one, for the expected-revision and identical-content checks and its
    # number too
    repo = RevisionRepository(session)
    repo.lock_environment(env.id)
    if (w := environment_withdrawal(session, env.id)) is not None:
        raise Conflict(f"environment {env.name!r} is {describe(w)}: it is not revised")
    # the newest revision's number and stored hash only (two columns, no row loaded)
    latest = repo.head(env.id)
    if (
        cmd.expected_revision is not None
        and latest is not None
        and latest[0] != cmd.expected_revision
    ):
        raise VersionMismatch("environment", env.id, cmd.expected_revision, latest[0])
    spec, data = envdata.normalise(env.kind, cmd.data, array)
    if phase_name is not None:
        envdata.check_exposure(env.kind, spec, None if data is None else data.size,
                               phase_name, phase_duration_s)
    content_hash = revision_hash(spec, data)
    if latest is not None and content_hash == latest[1]:
        raise Conflict(f"the data are identical to revision {latest[0]}; nothing to revise")
    return _append_revision(session, actor, env, spec, data, cmd.note,
                            number=(latest[0] if latest is not None else 0) + 1,
                            content_hash=content_hash)


def _append_revision(
    session: Session,
    actor: Actor,
    env: m.Environment,
    spec: dict[str, Any],
    data: np.ndarray | None,
    note: str,
    *,
    number: int | None = None,
    content_hash: str | None = None,
) -> m.EnvironmentRevision:
    """Append the next revision; `number` when the caller read it under the
    environment's row lock, `content_hash` when it has hashed the content already."""
    repo = RevisionRepository(session)
    rev = repo.add(
        m.EnvironmentRevision(
            environment_id=env.id,
            number=repo.next_number(env.id) if number is None else number,
            spec=spec,
            data=data,
            content_hash=content_hash or revision_hash(spec, data),
            author=actor.name,
            note=note,
        )
    )
    record(
        session,
        actor,
        "revise",
        "environment",
        env.id,
        revision=rev.number,
        content_hash=rev.content_hash,
        note=note,
    )
    return rev


def environment_by_id(session: Session, environment_id: int) -> m.Environment:
    return get(session, m.Environment, environment_id, "environment")


def read_environment(session: Session, env: m.Environment, *,
                     with_warnings: bool = False) -> s.EnvironmentRead:
    """The environment as every interface shows it; ``with_warnings`` adds the cautions
    about the life cycle it enters (one life-cycle read per axis: not for lists)."""
    return _environment_read(session, env, RevisionRepository(session).latest_number(env.id),
                             environment_withdrawal(session, env.id), with_warnings)


def environment_read(session: Session, environment_id: int) -> s.EnvironmentRead:
    """:func:`read_environment` of one environment by id, with its warnings: the row, its
    product and phase, the number of its latest revision and whether it is withdrawn in
    one statement (NotFound when it is not, or not in the caller's programs)."""
    check_id(environment_id, "environment")
    env_, rev = m.Environment, m.EnvironmentRevision
    latest = (select(func.max(rev.number)).where(rev.environment_id == env_.id)
              .correlate(env_).scalar_subquery())
    withdrawal = (select(m.Withdrawal.id).where(m.Withdrawal.environment_id == env_.id)
                  .correlate(env_).limit(1).scalar_subquery())
    row = session.execute(
        select(env_, latest, withdrawal).where(env_.id == environment_id)
        .options(joinedload(env_.product), joinedload(env_.phase))).first()
    if row is None:
        raise NotFound("environment", environment_id)
    env, number, withdrawn_id = row
    w = None if withdrawn_id is None else environment_withdrawal(session, env.id)
    return _environment_read(session, env, number, w, True)


def _environment_read(session: Session, env: m.Environment, latest: int | None,
                      w: m.Withdrawal | None, with_warnings: bool) -> s.EnvironmentRead:
    out = s.EnvironmentRead.model_validate(env)
    out.latest_revision = latest
    if w is not None:
        out.withdrawn = describe(w)
    elif with_warnings and env.phase_id is not None and env.kind in lifecycle.TIMED:
        axes = [env.axis] if env.axis is not m.Axis.all else [m.Axis.X, m.Axis.Y, m.Axis.Z]
        life = lifecycle.timed_of_phase(session, env.product, env.phase_id, axes)
        out.warnings = sorted({t for a in axes for t in lifecycle.time_counted_twice(life[a])})
    return out


def list_environments(
    session: Session,
    *,
    product_id: int | None = None,
    kind: m.EnvironmentKind | None = None,
    axis: m.Axis | None = None,
) -> list[m.Environment]:
    filters: dict[str, Any] = {}
    if product_id is not None:
        filters["product_id"] = product_id
    if kind is not None:
        filters["kind"] = kind
    if axis is not None:
        filters["axis"] = axis
    return list(EnvironmentRepository(session).list(**filters))


def read_revision(rev: m.EnvironmentRevision, kind: m.EnvironmentKind) -> s.RevisionRead:
    return s.RevisionRead(
        id=rev.id,
        environment_id=rev.environment_id,
        number=rev.number,
        spec=rev.spec,
        samples=None if rev.data is None else int(np.asarray(rev.data).size),
        content_hash=rev.content_hash,
        author=rev.author,
        note=rev.note,
        created_at=rev.created_at,
        summary=envdata.summarise(kind, rev.spec, rev.data).as_dict(),
    )


def history(session: Session, environment_id: int) -> list[s.RevisionRead]:
    env = get(session, m.Environment, environment_id, "environment")
    return [read_revision(r, env.kind) for r in RevisionRepository(session).history(env.id)]


def revision(session: Session, environment_id: int, number: int) -> m.EnvironmentRevision:
    for rev in RevisionRepository(session).history(environment_id):
        if rev.number == number:
            return rev
    raise NotFound("revision", f"{environment_id}/{number}")


def revision_ids_of_inputs(session: Session, product_id: int, inputs: str) -> list[int]:
    """Global revision ids of `inputs`, a comma-separated list of the product's
    environments by name or id, each with ``@n`` for its revision n (the latest revision
    without it): ``"flight Z@2,road X"``. A name is tried before an id."""
    envs = list_environments(session, product_id=product_id)
    by_name = {e.name: e for e in envs}
    by_id = {str(e.id): e for e in envs}
    out: list[int] = []
    items = [x.strip() for x in str(inputs).split(",") if x.strip()]
    if not items:
        raise ValidationFailed("inputs", inputs, "names no environment (give e.g. 'flight Z@2')")
    for item in items:
        ref, number = item, None
        if "@" in item:
            head, tail = item.rsplit("@", 1)
            if tail.strip().isdigit():
                ref, number = head.strip(), int(tail)
            elif head.strip() not in by_name:
                raise ValidationFailed("inputs", item, "revision after '@' must be a whole "
                                       "number, as in 'flight Z@2'")
        env = by_name.get(ref) or by_id.get(ref)
        if env is None:
            known = ", ".join(sorted(by_name)) or "none"
            raise ValidationFailed("inputs", item, f"is not an environment of the product "
                                   f"(its environments: {known})")
        if number is None:
            latest = RevisionRepository(session).latest(env.id)
            if latest is None:
                raise ValidationFailed("inputs", item, "has no revision")
            out.append(latest.id)
            continue
        try:
            out.append(revision(session, env.id, number).id)
        except NotFound:
            raise ValidationFailed("inputs", item, f"environment {env.name!r} has no "
                                   f"revision {number}") from None
    return out


def difference_curve(kind: m.EnvironmentKind, ra: m.EnvironmentRevision,
                     rb: m.EnvironmentRevision):
    """Revision b against revision a in dB over their common band, on a 1/24-octave grid:
    10 log10(b/a) for an ASD (power), 20 log10(b/a) for an SRS or sine amplitude.
    Returns (grid [Hz], dB, (lo, hi) [Hz], scale) or the reason there is no curve."""
    lo = max(_band(kind, ra.spec)[0], _band(kind, rb.spec)[0])
    hi = min(_band(kind, ra.spec)[1], _band(kind, rb.spec)[1])
    if lo >= hi:
        return "the two revisions share no frequency band"
    grid = octave_grid(lo, hi, 24)
    grid = grid[(grid >= lo) & (grid <= hi)]
    va = envdata.curve(kind, ra.spec, ra.data, grid)
    vb = envdata.curve(kind, rb.spec, rb.data, grid)
    ok = (va > 0) & (vb > 0)
    if not ok.any():
        return "no common frequency with both curves above zero"
    scale = 10.0 if kind is m.EnvironmentKind.random else 20.0  # power vs amplitude dB
    return grid[ok], scale * np.log10(vb[ok] / va[ok]), (lo, hi), scale


def compare(session: Session, environment_id: int, a: int, b: int) -> s.RevisionComparison:
    """Compare two revisions: overall measures and the largest difference in dB."""
    env = get(session, m.Environment, environment_id, "environment")
    ra, rb = revision(session, env.id, a), revision(session, env.id, b)
    out = s.RevisionComparison(
        environment_id=env.id,
        a=a,
        b=b,
        kind=env.kind,
        a_summary=envdata.summarise(env.kind, ra.spec, ra.data).as_dict(),
        b_summary=envdata.summarise(env.kind, rb.spec, rb.data).as_dict(),
        max_difference_db=None,
        max_difference_at_hz=None,
    )
    if env.kind is m.EnvironmentKind.time_history:
        out.notes.append("time histories are compared by their overall measures only")
        return out
    curve = difference_curve(env.kind, ra, rb)
    if isinstance(curve, str):
        out.notes.append(curve)
        return out
    grid, diff, (lo, hi), scale = curve
    i = int(np.argmax(np.abs(diff)))
    out.max_difference_db = float(diff[i])
    out.max_difference_at_hz = float(grid[i])
    out.notes.append(
        f"dB = {'10' if scale == 10 else '20'} log10(b/a) on a 1/24-octave grid, {lo:g}-{hi:g} Hz"
    )
    return out


def _band(kind: m.EnvironmentKind, spec: dict[str, Any]) -> tuple[float, float]:
    if kind is m.EnvironmentKind.sine:
        return spec["bands"][0]["f_lo_hz"], spec["bands"][-1]["f_hi_hz"]
    return spec["freq_hz"][0], spec["freq_hz"][-1]
