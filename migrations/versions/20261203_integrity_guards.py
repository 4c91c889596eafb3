"""integrity guards: append-only tables refuse REPLACE on SQLite and TRUNCATE on
PostgreSQL; issued documents carry the hash of their row

Revision ID: 0008
Revises: 0007
Create Date: 2026-12-03 06:40:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from qualplan.store.hashing import DOCUMENT_ROW_FIELDS, document_row_hash
from qualplan.store.triggers import create_append_only_guards, drop_append_only_guards

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None

#: Every append-only table at this revision (a new one gets create_append_only_guards
#: in the revision that makes it).
APPEND_ONLY = (
    "environment_revisions", "levels", "evidence", "events", "documents",
    "modal_summary_revisions", "response_estimates",
    "transfer_rule_revisions", "environment_derivations", "level_force_limits",
    "record_channels", "record_chunks",
)
#: The guards the revisions before this one made (UPDATE and DELETE).
OLD_GUARDS = ("update", "delete")
NEW_GUARDS = ("replace", "truncate")

_documents = sa.table(
    "documents",
    sa.column("id", sa.Integer()),
    sa.column("program_id", sa.Integer()),
    sa.column("product_id", sa.Integer()),
    sa.column("kind", sa.String()),
    sa.column("number", sa.String()),
    sa.column("revision", sa.Integer()),
    sa.column("title", sa.Text()),
    sa.column("content_hash", sa.String()),
    sa.column("input_hashes", sa.JSON()),
    sa.column("note", sa.Text()),
    sa.column("author", sa.String()),
    sa.column("created_at", sa.DateTime(timezone=True)),
    sa.column("row_hash", sa.String()),
)


def upgrade() -> None:
    conn = op.get_bind()
    # The documents' guard is lifted while their new column is filled, and put back.
    drop_append_only_guards(conn, "documents")
    with op.batch_alter_table("documents", schema=None) as batch_op:
        batch_op.add_column(sa.Column("row_hash", sa.String(length=64), nullable=True))
    rows = conn.execute(sa.select(*(_documents.c[f] for f in ("id", *DOCUMENT_ROW_FIELDS))))
    for row in rows.mappings().all():
        conn.execute(_documents.update().where(_documents.c.id == row["id"])
                     .values(row_hash=document_row_hash(row)))
    with op.batch_alter_table("documents", schema=None) as batch_op:
        batch_op.alter_column("row_hash", existing_type=sa.String(length=64), nullable=False)
    for table in APPEND_ONLY:
        create_append_only_guards(conn, table)


def downgrade() -> None:
    conn = op.get_bind()
    for table in APPEND_ONLY:
        drop_append_only_guards(conn, table, NEW_GUARDS)
    drop_append_only_guards(conn, "documents")
    with op.batch_alter_table("documents", schema=None) as batch_op:
        batch_op.drop_column("row_hash")
    create_append_only_guards(conn, "documents", OLD_GUARDS)
