"""jobs: long work (record imports, derivations, equivalence, documents) run as jobs; on
PostgreSQL also procrastinate's own schema, the queue its workers share

Revision ID: 0012
Revises: 0014
Create Date: 2026-12-03 06:50:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0012"
down_revision = "0014"
branch_labels = None
depends_on = None

#: procrastinate's objects, dropped on downgrade (its schema.sql creates these).
_PROCRASTINATE_TABLES = ("procrastinate_events", "procrastinate_periodic_defers",
                         "procrastinate_jobs", "procrastinate_workers")


def upgrade() -> None:
    op.create_table(
        "jobs",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("kind", sa.String(length=60), nullable=False),
        sa.Column("params", sa.JSON(), nullable=False),
        sa.Column("status", sa.String(length=20), nullable=False),
        sa.Column("progress", sa.Float(), nullable=False),
        sa.Column("phrase", sa.String(length=200), nullable=False),
        sa.Column("result", sa.JSON(), nullable=True),
        sa.Column("error", sa.JSON(), nullable=True),
        sa.Column("submitted_by", sa.String(length=120), nullable=False),
        sa.Column("runner", sa.String(length=20), nullable=False),
        sa.Column("queue_job_id", sa.Integer(), nullable=True),
        sa.Column("attempts", sa.Integer(), nullable=False),
        sa.Column("claim", sa.String(length=40), nullable=True),
        sa.Column("worker", sa.Text(), nullable=True),
        sa.Column("cancel_requested", sa.Boolean(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("started_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("finished_at", sa.DateTime(timezone=True), nullable=True),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_jobs")),
    )
    with op.batch_alter_table("jobs", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_jobs_kind"), ["kind"], unique=False)
        batch_op.create_index(batch_op.f("ix_jobs_status"), ["status"], unique=False)
    if op.get_bind().dialect.name == "postgresql":
        from procrastinate.schema import SchemaManager

        # as the driver gets it: the schema's RAISE formats keep their single %
        raw = op.get_bind().connection.dbapi_connection
        with raw.cursor() as cur:
            cur.execute(SchemaManager.get_schema())  # no parameters: no placeholders


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        for table in _PROCRASTINATE_TABLES:
            op.execute(f"DROP TABLE IF EXISTS {table} CASCADE")
        op.execute(
            "DO $$ DECLARE f record; BEGIN FOR f IN SELECT p.oid::regprocedure AS sig "
            "FROM pg_proc p JOIN pg_namespace n ON n.oid = p.pronamespace "
            "WHERE p.proname LIKE 'procrastinate\\_%' AND n.nspname = current_schema() "
            "LOOP EXECUTE 'DROP FUNCTION IF EXISTS ' || f.sig || ' CASCADE'; END LOOP; END $$")
        for typ in ("procrastinate_job_status", "procrastinate_job_event_type",
                    "procrastinate_job_to_defer_v1"):
            op.execute(f"DROP TYPE IF EXISTS {typ} CASCADE")
    with op.batch_alter_table("jobs", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_jobs_status"))
        batch_op.drop_index(batch_op.f("ix_jobs_kind"))
    op.drop_table("jobs")
