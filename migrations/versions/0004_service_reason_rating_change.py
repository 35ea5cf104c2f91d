"""service reason and rating change

A rebuild or replacement records why the life ended (``service_event.reason``; older
rows stay NULL and read as ``other``), and accepted life factors are kept as dated,
reversible changes of a component model's rating (``rating_change``).

Revision ID: 0004
Revises: 0002
Create Date: 2026-12-03 10:00:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("service_event", schema=None) as batch_op:
        batch_op.add_column(sa.Column("reason", sa.String(length=16), nullable=True))
    op.create_table(
        "rating_change",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("model_id", sa.Integer(), nullable=False),
        sa.Column("factor", sa.Float(), nullable=False),
        sa.Column("proposed_by", sa.String(length=120), nullable=False),
        sa.Column("data_summary", sa.Text(), nullable=False),
        sa.Column("accepted_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("undone_at", sa.DateTime(timezone=True), nullable=True),
        sa.ForeignKeyConstraint(
            ["model_id"],
            ["component_model.id"],
            name=op.f("fk_rating_change_model_id_component_model"),
            ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_rating_change")),
    )
    op.create_index("ix_rating_change_model_id", "rating_change", ["model_id", "id"])


def downgrade() -> None:
    op.drop_index("ix_rating_change_model_id", table_name="rating_change")
    op.drop_table("rating_change")
    with op.batch_alter_table("service_event", schema=None) as batch_op:
        batch_op.drop_column("reason")
