"""operating oil temperature, contamination level, life before the first upload

Histograms keep the upload's period mean oil temperature (``histogram.oil_temp_c``); the
registry gains the operating oil temperature (``component_model``, ``unit`` and
``component.operating_temp_c``), the ISO 281 contamination level (``site`` and
``oil.contamination_level``) and the life before the first upload
(``component.consumed_at_first_upload`` or ``component.last_rebuild_hour_meter``). Each
ledger row records the oil temperature the oil-condition factor used and its source
(``oil_temp_c``, ``oil_factor_source``) and the hours at the aISO floor (``kappa_floor_hours``
with its running total). Ledger rows written before this revision were computed the old
way (oil factor at the case-drain test temperature): the ledger is marked stale, and
``drivespan recompute`` rebuilds it.

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02 08:00:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None


def upgrade() -> None:
    # plain ADD COLUMN (SQLite supports it): no table is rebuilt
    for table, name, type_ in (
        ("component", "operating_temp_c", sa.Float()),
        ("component", "consumed_at_first_upload", sa.Float()),
        ("component", "last_rebuild_hour_meter", sa.Float()),
        ("component_model", "operating_temp_c", sa.Float()),
        ("histogram", "oil_temp_c", sa.Float()),
        ("ledger", "oil_temp_c", sa.Float()),
        ("ledger", "oil_factor_source", sa.String(length=8)),
        ("oil", "contamination_level", sa.String(length=32)),
        ("site", "contamination_level", sa.String(length=32)),
        ("unit", "operating_temp_c", sa.Float()),
    ):
        op.add_column(table, sa.Column(name, type_, nullable=True))
    for name in ("kappa_floor_hours", "cum_kappa_floor_hours"):
        op.add_column(
            "ledger", sa.Column(name, sa.Float(), nullable=False, server_default=sa.text("0"))
        )
    op.execute(
        "INSERT INTO setting (key, value) SELECT 'ledger_stale', 'true' "
        "WHERE EXISTS (SELECT 1 FROM ledger) "
        "AND NOT EXISTS (SELECT 1 FROM setting WHERE key = 'ledger_stale')"
    )


def downgrade() -> None:
    # plain DROP COLUMN (SQLite 3.35+): rebuilding a referenced table would break its keys
    for table, name in (
        ("unit", "operating_temp_c"),
        ("site", "contamination_level"),
        ("oil", "contamination_level"),
        ("ledger", "cum_kappa_floor_hours"),
        ("ledger", "kappa_floor_hours"),
        ("ledger", "oil_factor_source"),
        ("ledger", "oil_temp_c"),
        ("histogram", "oil_temp_c"),
        ("component_model", "operating_temp_c"),
        ("component", "last_rebuild_hour_meter"),
        ("component", "consumed_at_first_upload"),
        ("component", "operating_temp_c"),
    ):
        op.drop_column(table, name)
    op.execute("DELETE FROM setting WHERE key = 'ledger_stale'")
