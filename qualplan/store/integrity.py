"""Stored content checked against its hashes: on every read, and over the whole database.

- An environment revision's ``content_hash`` is recomputed from its spec and array data
  (:func:`qualplan.store.hashing.revision_hash`) whenever the ORM loads the row; a
  chunked record's revision is checked chunk by chunk when its samples are read
  (:func:`qualplan.store.records.unpack_chunk`) and as a whole by :func:`verify`.
- An issued document's ``row_hash`` (:func:`qualplan.store.hashing.document_row_hash`)
  is recomputed whenever the row is loaded.
- :func:`verify` walks every hashed table (revisions, record chunks, levels, modal
  summary and transfer rule revisions, documents) and lists each row that does not
  match, without stopping at the first.

A mismatch is :class:`StoredDataCorrupt`, naming the table and the row: the stored data
were changed outside qualplan (or damaged) and must not be used until restored.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

from sqlalchemy import event, select
from sqlalchemy.orm import Session

from qualplan.store import models as m
from qualplan.store.hashing import document_row_hash, json_hash, revision_hash
from qualplan.store.records import RecordChannel, RecordChunk, record_hash, unpack_chunk


class StoredDataCorrupt(RuntimeError):
    """A stored row does not match its content hash: changed outside qualplan or damaged."""

    def __init__(self, table: str, row_id: int | None, what: str) -> None:
        self.table, self.row_id, self.what = table, row_id, what
        super().__init__(f"stored data corrupt: {table} id={row_id}: {what}; restore the "
                         "database from a backup (run `qualplan db verify` for every such row)")


@dataclass(frozen=True)
class Mismatch:
    """One row that does not match its hash."""

    table: str
    row_id: int
    what: str

    def __str__(self) -> str:
        return f"{self.table} id={self.row_id}: {self.what}"


# --- row checks (each returns what is wrong, or None) ------------------------------------


def revision_problem(rev: m.EnvironmentRevision) -> str | None:
    """A plain revision whose spec and data do not give its content hash (a chunked record
    is checked by :func:`record_problem`, which needs its chunk rows)."""
    if isinstance(rev.spec, dict) and "record" in rev.spec:
        return None
    try:
        actual = revision_hash(rev.spec, rev.data)
    except (TypeError, ValueError) as exc:
        return f"the spec or data cannot be hashed ({exc})"
    if actual != rev.content_hash:
        return f"content hash {rev.content_hash[:12]}... stored, {actual[:12]}... computed"
    return None


def document_problem(doc: m.Document) -> str | None:
    try:
        actual = document_row_hash({f: getattr(doc, f) for f in
                                    ("program_id", "product_id", "kind", "number", "revision",
                                     "title", "content_hash", "input_hashes", "note", "author",
                                     "created_at")})
    except (TypeError, ValueError) as exc:
        return f"the row cannot be hashed ({exc})"
    if actual != doc.row_hash:
        return f"row hash {str(doc.row_hash)[:12]}... stored, {actual[:12]}... computed"
    return None


def level_problem(level: m.Level) -> str | None:
    try:
        actual = json_hash({"recipe": level.recipe, "inputs": level.input_hashes})
    except (TypeError, ValueError) as exc:
        return f"the recipe or input hashes cannot be hashed ({exc})"
    if actual != level.level_hash:
        return f"level hash {level.level_hash[:12]}... stored, {actual[:12]}... computed"
    return None


def record_problem(session: Session, rev: m.EnvironmentRevision) -> str | None:
    """A chunked record: every chunk against its SHA-256, the revision against them all."""
    channels = [
        {"index": c.index, "name": c.name, "axis": c.axis, "unit": c.unit,
         "source_unit": c.source_unit, "calibration": c.calibration}
        for c in session.scalars(select(RecordChannel).where(RecordChannel.revision_id == rev.id)
                                 .order_by(RecordChannel.index))
    ]
    hashes = []
    rows = session.execute(
        select(RecordChunk.id, RecordChunk.sha256, RecordChunk.data)
        .where(RecordChunk.revision_id == rev.id)
        .order_by(RecordChunk.channel_index, RecordChunk.seq)
        .execution_options(yield_per=64))
    for chunk_id, sha, blob in rows:
        try:
            unpack_chunk(blob, sha)
        except Exception as exc:  # zlib.error or the hash mismatch: damaged bytes either way
            return f"record chunk id={chunk_id} is damaged ({exc})"
        hashes.append(sha)
    if record_hash(rev.spec, channels, hashes) != rev.content_hash:
        return "the record's spec, channels or chunk hashes do not give its content hash"
    return None


def _modal_problem(rev: m.ModalSummaryRevision) -> str | None:
    return None if json_hash(rev.spec) == rev.content_hash else \
        "the modes do not give the stored content hash"


def _rule_problem(rev: m.TransferRuleRevision) -> str | None:
    actual = json_hash({"spec": rev.spec, "basis": rev.basis, "provenance": rev.provenance})
    return None if actual == rev.content_hash else \
        "the rule's spec, basis and provenance do not give the stored content hash"


# --- on read -----------------------------------------------------------------------------


UNCHECKED = "qualplan_unchecked"


def _unchecked(context) -> bool:
    """True when the statement asked not to be checked (verify reports instead)."""
    opts = getattr(context, "execution_options", None) or {}
    return bool(opts.get(UNCHECKED))


@event.listens_for(m.EnvironmentRevision, "load")
def _check_revision_on_load(rev: m.EnvironmentRevision, context) -> None:
    if _unchecked(context):
        return
    problem = revision_problem(rev)
    if problem is not None:
        raise StoredDataCorrupt("environment_revisions", rev.id, problem)


@event.listens_for(m.Document, "load")
def _check_document_on_load(doc: m.Document, context) -> None:
    if _unchecked(context):
        return
    problem = document_problem(doc)
    if problem is not None:
        raise StoredDataCorrupt("documents", doc.id, problem)


@event.listens_for(m.Document, "before_insert")
def _seal_document(_mapper, _connection, doc: m.Document) -> None:
    """Set the row hash as the row is written (created_at first, so that it is covered)."""
    if doc.created_at is None:
        doc.created_at = m.utcnow()
    doc.row_hash = document_row_hash({f: getattr(doc, f) for f in
                                      ("program_id", "product_id", "kind", "number",
                                       "revision", "title", "content_hash", "input_hashes",
                                       "note", "author", "created_at")})


# --- the whole database ------------------------------------------------------------------


def _rows(session: Session, model) -> Iterator[tuple[int, object | None, str | None]]:
    """(id, row, None) for each row of `model`, or (id, None, why) when the row cannot be
    read at all (damaged bytes); the on-load checks are off (verify reports instead)."""
    ids = session.scalars(select(model.id).order_by(model.id)).all()
    for row_id in ids:
        try:
            row = session.execute(select(model).where(model.id == row_id),
                                  execution_options={UNCHECKED: True}).scalar_one()
        except (ValueError, TypeError, OSError, EOFError) as exc:  # zlib, numpy, JSON
            yield row_id, None, f"the row cannot be read ({type(exc).__name__}: {exc})"
            continue
        yield row_id, row, None
        session.expunge(row)


def verify(session: Session) -> tuple[dict[str, int], list[Mismatch]]:
    """Check every hashed row; return the rows checked per table and every mismatch."""
    checked: dict[str, int] = {}
    bad: list[Mismatch] = []
    checked["environment_revisions"] = 0
    for row_id, rev, problem in _rows(session, m.EnvironmentRevision):
        checked["environment_revisions"] += 1
        if rev is not None:
            problem = revision_problem(rev)
            if problem is None and isinstance(rev.spec, dict) and "record" in rev.spec:
                problem = record_problem(session, rev)
        if problem:
            bad.append(Mismatch("environment_revisions", row_id, problem))
    for table, model, fn in (("levels", m.Level, level_problem),
                             ("modal_summary_revisions", m.ModalSummaryRevision,
                              _modal_problem),
                             ("transfer_rule_revisions", m.TransferRuleRevision,
                              _rule_problem),
                             ("documents", m.Document, document_problem)):
        checked[table] = 0
        for row_id, row, problem in _rows(session, model):
            checked[table] += 1
            if row is not None:
                problem = fn(row)
            if problem:
                bad.append(Mismatch(table, row_id, problem))
    return checked, bad
