"""trace summary

A pressure trace is stored as an ordinary upload; what only the trace shows (its
summary, rainflow cycles, excursions above the relief and cut-off settings, and a
min-max envelope for plotting) is kept beside it as JSON in ``trace_summary``.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-04 10:00:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "trace_summary",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("file_id", sa.Integer(), nullable=False),
        sa.Column("component_id", sa.Integer(), nullable=False),
        sa.Column("summary", sa.Text(), nullable=False),
        sa.ForeignKeyConstraint(
            ["component_id"],
            ["component.id"],
            name=op.f("fk_trace_summary_component_id_component"),
            ondelete="CASCADE",
        ),
        sa.ForeignKeyConstraint(
            ["file_id"],
            ["upload_file.id"],
            name=op.f("fk_trace_summary_file_id_upload_file"),
            ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_trace_summary")),
        sa.UniqueConstraint("file_id", "component_id", name="uq_trace_summary_file_component"),
    )
    op.create_index("ix_trace_summary_component_id", "trace_summary", ["component_id", "id"])


def downgrade() -> None:
    op.drop_index("ix_trace_summary_component_id", table_name="trace_summary")
    op.drop_table("trace_summary")
