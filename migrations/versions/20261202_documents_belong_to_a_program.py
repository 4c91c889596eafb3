"""documents belong to a program; the product becomes optional (a program-wide audit
is about no single product)

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 02:24:57
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def _drop_triggers() -> None:
    if op.get_bind().dialect.name == "sqlite":
        op.execute("DROP TRIGGER IF EXISTS documents_no_update")
        op.execute("DROP TRIGGER IF EXISTS documents_no_delete")
    else:
        op.execute("DROP TRIGGER IF EXISTS documents_immutable ON documents")


def _create_triggers() -> None:
    if op.get_bind().dialect.name == "sqlite":
        for action in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER documents_no_{action.lower()} BEFORE {action} ON documents "
                "BEGIN SELECT RAISE(ABORT, 'documents rows are immutable'); END"
            )
    else:
        # qualplan_refuse_change() comes from revision 0001.
        op.execute(
            "CREATE TRIGGER documents_immutable BEFORE UPDATE OR DELETE ON documents "
            "FOR EACH ROW EXECUTE FUNCTION qualplan_refuse_change()"
        )


def upgrade() -> None:
    # The append-only guard is lifted for the data move only, and put back.
    _drop_triggers()
    with op.batch_alter_table("documents", schema=None) as batch_op:
        batch_op.add_column(sa.Column("program_id", sa.Integer(), nullable=True))
        batch_op.alter_column("product_id", existing_type=sa.Integer(), nullable=True)
    op.execute(
        "UPDATE documents SET program_id = "
        "(SELECT products.program_id FROM products WHERE products.id = documents.product_id)"
    )
    with op.batch_alter_table("documents", schema=None) as batch_op:
        batch_op.alter_column("program_id", existing_type=sa.Integer(), nullable=False)
        batch_op.create_index(batch_op.f("ix_documents_program_id"), ["program_id"],
                              unique=False)
        batch_op.create_foreign_key(batch_op.f("fk_documents_program_id_programs"),
                                    "programs", ["program_id"], ["id"])
    # Coming back from a downgrade: program-wide documents are program-wide again, so
    # that the round trip leaves every document row as it was.
    if "documents_program_wide" in sa.inspect(op.get_bind()).get_table_names():
        op.execute("UPDATE documents SET product_id = NULL WHERE id IN "
                   "(SELECT document_id FROM documents_program_wide)")
        op.drop_table("documents_program_wide")
    _create_triggers()


def downgrade() -> None:
    # A program-wide document goes back to the older convention: its program's first
    # root product. Which documents were program-wide is kept aside, for the upgrade.
    _drop_triggers()
    op.create_table("documents_program_wide",
                    sa.Column("document_id", sa.Integer(), primary_key=True))
    op.execute("INSERT INTO documents_program_wide (document_id) "
               "SELECT id FROM documents WHERE product_id IS NULL")
    op.execute(
        "UPDATE documents SET product_id = (SELECT MIN(products.id) FROM products "
        "WHERE products.program_id = documents.program_id AND products.parent_id IS NULL) "
        "WHERE product_id IS NULL"
    )
    with op.batch_alter_table("documents", schema=None) as batch_op:
        batch_op.drop_constraint(batch_op.f("fk_documents_program_id_programs"),
                                 type_="foreignkey")
        batch_op.drop_index(batch_op.f("ix_documents_program_id"))
        batch_op.alter_column("product_id", existing_type=sa.Integer(), nullable=False)
        batch_op.drop_column("program_id")
    _create_triggers()
