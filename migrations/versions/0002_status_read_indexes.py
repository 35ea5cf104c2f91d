"""status read indexes

The ledger's two per-component indexes gain the status read's tie-break columns, so
"the latest row at or before a bound" is one index seek without a sort; a covering
index on reading lets the status read of case-drain readings skip the table; an index
on service_event finds each component's last rebuild with one seek. Index changes
only: no table is rebuilt.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-02 01:01:57.822362
"""

from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

_WEAR_COLUMNS = [
    "component_id",
    "taken_at",
    "hour_meter",
    "case_drain_lpm",
    "test_pressure_bar",
    "oil_temp_c",
]


def upgrade() -> None:
    op.drop_index("ix_ledger_component_period", table_name="ledger")
    op.create_index(
        "ix_ledger_component_period", "ledger", ["component_id", "period_end", "upload_id"]
    )
    op.drop_index("ix_ledger_component_cum_hours", table_name="ledger")
    op.create_index(
        "ix_ledger_component_cum_hours",
        "ledger",
        ["component_id", "cum_hours", "period_end", "upload_id"],
    )
    op.create_index("ix_reading_component_wear", "reading", _WEAR_COLUMNS)
    op.create_index(
        "ix_service_event_component_kind_at", "service_event", ["component_id", "kind", "at"]
    )


def downgrade() -> None:
    op.drop_index("ix_service_event_component_kind_at", table_name="service_event")
    op.drop_index("ix_reading_component_wear", table_name="reading")
    op.drop_index("ix_ledger_component_cum_hours", table_name="ledger")
    op.create_index("ix_ledger_component_cum_hours", "ledger", ["component_id", "cum_hours"])
    op.drop_index("ix_ledger_component_period", table_name="ledger")
    op.create_index("ix_ledger_component_period", "ledger", ["component_id", "period_end"])
