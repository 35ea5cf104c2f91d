"""unique histogram period

The index of a component's histograms by quantity and period start becomes unique: a
second copy of a stored histogram (same component, quantity and period) can no longer be
written, whatever the checks at ingest missed. Stored periods of one drive loop never
overlap, so a store filled one file at a time already satisfies it.

A store filled by concurrent ingests before the write lock existed may hold second
copies. They are removed first (the copy stored first is kept), with the ledger rows of
uploads left without histograms, and the running totals of the affected components are
summed again. Only index and row changes: no table is rebuilt.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 07:09:18.614262
"""

import logging

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None

_COLUMNS = ["component_id", "quantity", "period_start"]
_CUM = {
    "cum_meter_hours": "meter_hours",
    "cum_hours": "hours",
    "cum_damage": "damage",
    "cum_relief_hours": "relief_hours",
    "cum_cutoff_hours": "cutoff_hours",
    "cum_relief_heat_kwh": "relief_heat_kwh",
}
log = logging.getLogger("alembic.runtime.migration")


def upgrade() -> None:
    _remove_second_copies(op.get_bind())
    with op.batch_alter_table("histogram", schema=None) as batch_op:
        batch_op.drop_index("ix_histogram_component_period")
        batch_op.create_index("ix_histogram_component_period", _COLUMNS, unique=True)


def downgrade() -> None:
    with op.batch_alter_table("histogram", schema=None) as batch_op:
        batch_op.drop_index("ix_histogram_component_period")
        batch_op.create_index("ix_histogram_component_period", _COLUMNS, unique=False)


def _remove_second_copies(conn: sa.Connection) -> None:
    """Delete every histogram whose component, quantity and period start an earlier one
    has; then uploads (and their ledger rows) left without histograms of a component."""
    groups = conn.execute(
        sa.text(
            "SELECT component_id, quantity, period_start, MIN(id) FROM histogram "
            "GROUP BY component_id, quantity, period_start HAVING COUNT(*) > 1"
        )
    ).all()
    if not groups:
        return
    touched: set[tuple[int, int]] = set()
    removed = 0
    for comp, quantity, start, keep in groups:
        key = {"c": comp, "q": quantity, "s": start, "keep": keep}
        where = "component_id = :c AND quantity = :q AND period_start = :s AND id > :keep"
        rows = conn.execute(sa.text(f"SELECT upload_id FROM histogram WHERE {where}"), key)
        touched |= {(int(u), int(comp)) for (u,) in rows}
        removed += conn.execute(sa.text(f"DELETE FROM histogram WHERE {where}"), key).rowcount
    for upload_id, comp in sorted(touched):
        key = {"u": upload_id, "c": comp}
        left = conn.execute(
            sa.text("SELECT COUNT(*) FROM histogram WHERE upload_id = :u AND component_id = :c"),
            key,
        ).scalar()
        if not left:
            conn.execute(
                sa.text("DELETE FROM ledger WHERE upload_id = :u AND component_id = :c"), key
            )
    conn.execute(sa.text("DELETE FROM upload WHERE id NOT IN (SELECT upload_id FROM histogram)"))
    for comp in sorted({c for _, c in touched}):
        _sum_again(conn, comp)
    log.warning(
        "removed %d second copies of stored histograms (concurrent ingests before the "
        "write lock); their running totals are summed again",
        removed,
    )


def _sum_again(conn: sa.Connection, comp: int) -> None:
    """Running totals of one component's ledger rows in period order, from zero."""
    cols = ", ".join(_CUM.values())
    rows = conn.execute(
        sa.text(
            f"SELECT id, {cols} FROM ledger WHERE component_id = :c ORDER BY period_end, upload_id"
        ),
        {"c": comp},
    ).all()
    totals = dict.fromkeys(_CUM, 0.0)
    sets = ", ".join(f"{cum} = :{cum}" for cum in _CUM)
    for row in rows:
        values = dict(zip(_CUM.values(), row[1:], strict=True))
        for cum, col in _CUM.items():
            totals[cum] += values[col]
        conn.execute(sa.text(f"UPDATE ledger SET {sets} WHERE id = :id"), {**totals, "id": row[0]})
