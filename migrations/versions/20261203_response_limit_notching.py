"""response-limit notching stored with a test level (limit, transmissibility, notched
input, notches, acceptance), append-only like the force limits

Revision ID: 0013
Revises: 0007
Create Date: 2026-12-03 06:40:00.000000
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0013"
down_revision = "0007"
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
    dialect = op.get_bind().dialect.name
    if dialect == "sqlite":
        for action in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER {TABLE}_no_{action.lower()} BEFORE {action} ON {TABLE} "
                f"BEGIN SELECT RAISE(ABORT, '{TABLE} rows are immutable'); END"
            )
    elif dialect == "postgresql":
        # qualplan_refuse_change() comes from revision 0001.
        op.execute(
            f"CREATE TRIGGER {TABLE}_immutable BEFORE UPDATE OR DELETE ON {TABLE} "
            "FOR EACH ROW EXECUTE FUNCTION qualplan_refuse_change()"
        )


def downgrade() -> None:
    dialect = op.get_bind().dialect.name
    if dialect == "sqlite":
        op.execute(f"DROP TRIGGER IF EXISTS {TABLE}_no_update")
        op.execute(f"DROP TRIGGER IF EXISTS {TABLE}_no_delete")
    elif dialect == "postgresql":
        op.execute(f"DROP TRIGGER IF EXISTS {TABLE}_immutable ON {TABLE}")
    with op.batch_alter_table(TABLE, schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_level_notchings_level_id"))
    op.drop_table(TABLE)
