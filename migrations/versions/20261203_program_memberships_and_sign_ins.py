"""program memberships (a role per program; admin stays global) and server-side sign-ins

Existing non-admin users become members of every existing program with their current
global role, so nobody loses access on upgrade.

Revision ID: 0014
Revises: 0011
Create Date: 2026-12-03 06:40:00
"""

from __future__ import annotations

from datetime import UTC, datetime

import sqlalchemy as sa
from alembic import op

revision = "0014"
down_revision = "0011"
branch_labels = None
depends_on = None

ROLES = ("viewer", "engineer", "approver", "admin")


def upgrade() -> None:
    op.create_table(
        "memberships",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("program_id", sa.Integer(), nullable=False),
        sa.Column(
            "role",
            sa.Enum(*ROLES, name="membership_role", native_enum=False, create_constraint=True,
                    length=20),
            nullable=False,
        ),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.CheckConstraint("role <> 'admin'", name=op.f("ck_memberships_not_admin")),
        sa.ForeignKeyConstraint(["user_id"], ["users.id"], ondelete="CASCADE",
                                name=op.f("fk_memberships_user_id_users")),
        sa.ForeignKeyConstraint(["program_id"], ["programs.id"], ondelete="CASCADE",
                                name=op.f("fk_memberships_program_id_programs")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_memberships")),
        sa.UniqueConstraint("user_id", "program_id",
                            name=op.f("uq_memberships_user_id_program_id")),
    )
    with op.batch_alter_table("memberships", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_memberships_user_id"), ["user_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_memberships_program_id"), ["program_id"],
                              unique=False)

    op.create_table(
        "sign_ins",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("key_hash", sa.String(length=64), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("token_id", sa.Integer(), nullable=True),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("expires_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("ended_at", sa.DateTime(timezone=True), nullable=True),
        sa.ForeignKeyConstraint(["user_id"], ["users.id"], ondelete="CASCADE",
                                name=op.f("fk_sign_ins_user_id_users")),
        sa.ForeignKeyConstraint(["token_id"], ["api_tokens.id"], ondelete="CASCADE",
                                name=op.f("fk_sign_ins_token_id_api_tokens")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_sign_ins")),
        sa.UniqueConstraint("key_hash", name=op.f("uq_sign_ins_key_hash")),
    )
    with op.batch_alter_table("sign_ins", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_sign_ins_user_id"), ["user_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_sign_ins_token_id"), ["token_id"], unique=False)

    # Nothing breaks on upgrade: every non-admin user keeps its global role in every program.
    bind = op.get_bind()
    users = bind.execute(sa.text("SELECT id, role FROM users WHERE role <> 'admin'")).all()
    programs = bind.execute(sa.text("SELECT id FROM programs")).scalars().all()
    now = datetime.now(UTC)
    memberships = sa.table(
        "memberships", sa.column("user_id", sa.Integer), sa.column("program_id", sa.Integer),
        sa.column("role", sa.String), sa.column("created_at", sa.DateTime(timezone=True)),
    )
    rows = [{"user_id": u.id, "program_id": p, "role": u.role, "created_at": now}
            for u in users for p in programs]
    if rows:
        op.bulk_insert(memberships, rows)


def downgrade() -> None:
    with op.batch_alter_table("sign_ins", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_sign_ins_token_id"))
        batch_op.drop_index(batch_op.f("ix_sign_ins_user_id"))
    op.drop_table("sign_ins")
    with op.batch_alter_table("memberships", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_memberships_program_id"))
        batch_op.drop_index(batch_op.f("ix_memberships_user_id"))
    op.drop_table("memberships")
