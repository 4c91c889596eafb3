"""policy confirmations: who checked a margin policy's values against the issue in force
of its standard, and when (append-only, like events)

Revision ID: 0011
Revises: 0013
Create Date: 2026-12-03 06:50:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from qualplan.store.triggers import create_append_only_guards, drop_append_only_guards

revision = "0011"
down_revision = "0013"
branch_labels = None
depends_on = None

TABLE = "policy_confirmations"


def upgrade() -> None:
    op.create_table(
        TABLE,
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("policy_id", sa.Integer(), nullable=False),
        sa.Column("policy_version", sa.Integer(), nullable=False),
        sa.Column("issue", sa.Text(), nullable=False),
        sa.Column("confirmed_by", sa.String(length=200), nullable=False),
        sa.Column("note", sa.Text(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(["policy_id"], ["margin_policies.id"],
                                name=op.f("fk_policy_confirmations_policy_id_margin_policies")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_policy_confirmations")),
    )
    with op.batch_alter_table(TABLE, schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_policy_confirmations_policy_id"), ["policy_id"],
                              unique=False)
    create_append_only_guards(op.get_bind(), TABLE)


def downgrade() -> None:
    drop_append_only_guards(op.get_bind(), TABLE)
    with op.batch_alter_table(TABLE, schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_policy_confirmations_policy_id"))
    op.drop_table(TABLE)
