"""withdrawals, supersessions, stored document baselines, sign-offs and waiver requests
(all append-only), and on waivers the request they answer and the no-evidence flag

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-03 06:40:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from qualplan.store.triggers import create_append_only_guards, drop_append_only_guards

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None

TABLES = ("waiver_requests", "withdrawals", "level_supersessions", "document_levels",
          "signoffs")


def upgrade() -> None:
    op.create_table(
        "waiver_requests",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("requirement_id", sa.Integer(), nullable=False),
        sa.Column("requested_by", sa.String(length=120), nullable=False),
        sa.Column("reason", sa.Text(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(["requirement_id"], ["requirements.id"],
                                name=op.f("fk_waiver_requests_requirement_id_requirements")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_waiver_requests")),
    )
    with op.batch_alter_table("waiver_requests", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_waiver_requests_requirement_id"),
                              ["requirement_id"], unique=False)
    with op.batch_alter_table("waivers", schema=None) as batch_op:
        batch_op.add_column(sa.Column("request_id", sa.Integer(), nullable=True))
        batch_op.add_column(sa.Column("without_evidence", sa.Boolean(), server_default="0",
                                      nullable=False))
        batch_op.create_foreign_key(batch_op.f("fk_waivers_request_id_waiver_requests"),
                                    "waiver_requests", ["request_id"], ["id"])

    op.create_table(
        "withdrawals",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("environment_id", sa.Integer(), nullable=True),
        sa.Column("level_id", sa.Integer(), nullable=True),
        sa.Column("reason", sa.Text(), nullable=False),
        sa.Column("actor", sa.String(length=120), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.CheckConstraint("(environment_id IS NULL) <> (level_id IS NULL)",
                           name=op.f("ck_withdrawals_one_target")),
        sa.ForeignKeyConstraint(["environment_id"], ["environments.id"],
                                name=op.f("fk_withdrawals_environment_id_environments")),
        sa.ForeignKeyConstraint(["level_id"], ["levels.id"],
                                name=op.f("fk_withdrawals_level_id_levels")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_withdrawals")),
        sa.UniqueConstraint("environment_id", name=op.f("uq_withdrawals_environment_id")),
        sa.UniqueConstraint("level_id", name=op.f("uq_withdrawals_level_id")),
    )
    op.create_table(
        "level_supersessions",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("old_level_id", sa.Integer(), nullable=False),
        sa.Column("new_level_id", sa.Integer(), nullable=False),
        sa.Column("difference", sa.JSON(), nullable=False),
        sa.Column("actor", sa.String(length=120), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(["new_level_id"], ["levels.id"],
                                name=op.f("fk_level_supersessions_new_level_id_levels")),
        sa.ForeignKeyConstraint(["old_level_id"], ["levels.id"],
                                name=op.f("fk_level_supersessions_old_level_id_levels")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_level_supersessions")),
        sa.UniqueConstraint("new_level_id", name=op.f("uq_level_supersessions_new_level_id")),
        sa.UniqueConstraint("old_level_id", name=op.f("uq_level_supersessions_old_level_id")),
    )
    op.create_table(
        "document_levels",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("document_id", sa.Integer(), nullable=False),
        sa.Column("level_id", sa.Integer(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.ForeignKeyConstraint(["document_id"], ["documents.id"],
                                name=op.f("fk_document_levels_document_id_documents")),
        sa.ForeignKeyConstraint(["level_id"], ["levels.id"],
                                name=op.f("fk_document_levels_level_id_levels")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_document_levels")),
        sa.UniqueConstraint("document_id", "level_id",
                            name=op.f("uq_document_levels_document_id_level_id")),
    )
    with op.batch_alter_table("document_levels", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_document_levels_document_id"), ["document_id"],
                              unique=False)
    op.create_table(
        "signoffs",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("document_id", sa.Integer(), nullable=False),
        sa.Column("role", sa.Enum("prepared", "checked", "approved", name="signoff_role",
                                  native_enum=False, create_constraint=True, length=20),
                  nullable=False),
        sa.Column("user_name", sa.String(length=120), nullable=False),
        sa.Column("signed_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(["document_id"], ["documents.id"],
                                name=op.f("fk_signoffs_document_id_documents")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_signoffs")),
        sa.UniqueConstraint("document_id", "role", name=op.f("uq_signoffs_document_id_role")),
        sa.UniqueConstraint("document_id", "user_name",
                            name=op.f("uq_signoffs_document_id_user_name")),
    )
    with op.batch_alter_table("signoffs", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_signoffs_document_id"), ["document_id"],
                              unique=False)

    conn = op.get_bind()
    for table in TABLES:
        create_append_only_guards(conn, table)


def downgrade() -> None:
    conn = op.get_bind()
    for table in TABLES:
        drop_append_only_guards(conn, table)
    with op.batch_alter_table("signoffs", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_signoffs_document_id"))
    op.drop_table("signoffs")
    with op.batch_alter_table("document_levels", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_document_levels_document_id"))
    op.drop_table("document_levels")
    op.drop_table("level_supersessions")
    op.drop_table("withdrawals")
    with op.batch_alter_table("waivers", schema=None) as batch_op:
        batch_op.drop_constraint(batch_op.f("fk_waivers_request_id_waiver_requests"),
                                 type_="foreignkey")
        batch_op.drop_column("without_evidence")
        batch_op.drop_column("request_id")
    with op.batch_alter_table("waiver_requests", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_waiver_requests_requirement_id"))
    op.drop_table("waiver_requests")
