"""response-limit notching stored with a test level (limit, transmissibility, notched
input, notches, acceptance), append-only like the force limits

Revision ID: 0013
Revises: 0009
Create Date: 2026-12-03 06:40:00.000000
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from qualplan.store.triggers import create_append_only_guards, drop_append_only_guards

revision = "0013"
down_revision = "0009"
branch_labels = None
depends_on = None

TABLE = "level_notchings"


def upgrade() -> None:
    op.create_table(
        TABLE,
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("level_id", sa.Integer(), nullable=False),
        sa.Column("params", sa.JSON(), nullable=False),
        sa.Column("result", sa.JSON(), nullable=False),
        sa.Column("level_hash", sa.String(length=64), nullable=False),
        sa.Column("author", sa.String(length=120), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["level_id"], ["levels.id"], name=op.f("fk_level_notchings_level_id_levels")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_level_notchings")),
    )
    with op.batch_alter_table(TABLE, schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_level_notchings_level_id"), ["level_id"],
                              unique=False)
    create_append_only_guards(op.get_bind(), TABLE)


def downgrade() -> None:
    drop_append_only_guards(op.get_bind(), TABLE)
    with op.batch_alter_table(TABLE, schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_level_notchings_level_id"))
    op.drop_table(TABLE)
