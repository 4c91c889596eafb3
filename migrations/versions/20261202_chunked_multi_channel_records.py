"""chunked multi-channel records: channels (name, axis, unit, calibration) and fixed-size
compressed chunks with their hashes, both append-only like revisions

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02 18:00:08.120162
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None

TABLES = ("record_channels", "record_chunks")


def upgrade() -> None:
    op.create_table(
        "record_channels",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("revision_id", sa.Integer(), nullable=False),
        sa.Column("index", sa.Integer(), nullable=False),
        sa.Column("name", sa.String(length=120), nullable=False),
        sa.Column("axis", sa.String(length=20), nullable=False),
        sa.Column("unit", sa.String(length=20), nullable=False),
        sa.Column("source_unit", sa.String(length=40), nullable=False),
        sa.Column("calibration", sa.Float(), nullable=False),
        sa.ForeignKeyConstraint(
            ["revision_id"], ["environment_revisions.id"],
            name=op.f("fk_record_channels_revision_id_environment_revisions"),
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_record_channels")),
        sa.UniqueConstraint("revision_id", "index",
                            name=op.f("uq_record_channels_revision_id_index")),
        sa.UniqueConstraint("revision_id", "name",
                            name=op.f("uq_record_channels_revision_id_name")),
    )
    with op.batch_alter_table("record_channels", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_record_channels_revision_id"), ["revision_id"],
                              unique=False)

    op.create_table(
        "record_chunks",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("revision_id", sa.Integer(), nullable=False),
        sa.Column("channel_index", sa.Integer(), nullable=False),
        sa.Column("seq", sa.Integer(), nullable=False),
        sa.Column("n_samples", sa.Integer(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("data", sa.LargeBinary(), nullable=False),
        sa.ForeignKeyConstraint(
            ["revision_id"], ["environment_revisions.id"],
            name=op.f("fk_record_chunks_revision_id_environment_revisions"),
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_record_chunks")),
        sa.UniqueConstraint("revision_id", "channel_index", "seq",
                            name=op.f("uq_record_chunks_revision_id_channel_index_seq")),
    )
    with op.batch_alter_table("record_chunks", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_record_chunks_revision_id"), ["revision_id"],
                              unique=False)

    dialect = op.get_bind().dialect.name
    for table in TABLES:
        if dialect == "sqlite":
            for action in ("UPDATE", "DELETE"):
                op.execute(
                    f"CREATE TRIGGER {table}_no_{action.lower()} BEFORE {action} ON {table} "
                    f"BEGIN SELECT RAISE(ABORT, '{table} rows are immutable'); END"
                )
        elif dialect == "postgresql":
            # qualplan_refuse_change() comes from revision 0001.
            op.execute(
                f"CREATE TRIGGER {table}_immutable BEFORE UPDATE OR DELETE ON {table} "
                "FOR EACH ROW EXECUTE FUNCTION qualplan_refuse_change()"
            )


def downgrade() -> None:
    dialect = op.get_bind().dialect.name
    for table in TABLES:
        if dialect == "sqlite":
            op.execute(f"DROP TRIGGER IF EXISTS {table}_no_update")
            op.execute(f"DROP TRIGGER IF EXISTS {table}_no_delete")
        elif dialect == "postgresql":
            op.execute(f"DROP TRIGGER IF EXISTS {table}_immutable ON {table}")
    with op.batch_alter_table("record_chunks", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_record_chunks_revision_id"))
    op.drop_table("record_chunks")
    with op.batch_alter_table("record_channels", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_record_channels_revision_id"))
    op.drop_table("record_channels")
