"""Fleet status (pure: DataFrames in, DataFrames out): remaining life, due dates, flags,
the ranking and one unit's detail.

Modules: :mod:`~monitor.fleet.params` (settings, column and flag names),
:mod:`~monitor.fleet.status` (bearing life and the ranking),
:mod:`~monitor.fleet.wear_status` (case-drain wear columns),
:mod:`~monitor.fleet.detail` (the unit report's per-drive detail). The public names are
gathered here.
"""

from monitor.fleet.detail import (
    ASSUMPTION_COLUMNS,
    ESTIMATE_NOTICE,
    assumption_table,
    case_drain_detail,
    life_curve,
    oil_samples,
    relief_monthly,
    trace_list,
    unit_summary,
    window_rows,
    window_spectrum,
)
from monitor.fleet.params import (
    DEFAULT_LIMITS,
    EXTRA_COLUMNS,
    FLAG_FEW,
    FLAG_OFF_REFERENCE,
    FLAG_RELIEF,
    FLAG_STALE,
    FLAG_STEP,
    FLAGS,
    RANK_COLUMNS,
    STATUS_COLUMNS,
    StatusParams,
    as_of_instant,
)
from monitor.fleet.status import (
    STATUS_BANDS,
    bearing_frame,
    fleet_status,
    rank_records,
    sort_status,
)
from monitor.fleet.wear_status import (
    case_drain_limit_lpm,
    case_drain_step,
    normalised_case_drain,
    oil_viscosity_line,
    readings_off_reference,
    wear_frame,
)

__all__ = [
    "ASSUMPTION_COLUMNS",
    "DEFAULT_LIMITS",
    "ESTIMATE_NOTICE",
    "EXTRA_COLUMNS",
    "assumption_table",
    "FLAGS",
    "FLAG_FEW",
    "FLAG_OFF_REFERENCE",
    "FLAG_RELIEF",
    "FLAG_STALE",
    "FLAG_STEP",
    "RANK_COLUMNS",
    "STATUS_BANDS",
    "STATUS_COLUMNS",
    "StatusParams",
    "as_of_instant",
    "bearing_frame",
    "case_drain_detail",
    "case_drain_limit_lpm",
    "case_drain_step",
    "fleet_status",
    "life_curve",
    "normalised_case_drain",
    "oil_samples",
    "oil_viscosity_line",
    "rank_records",
    "readings_off_reference",
    "relief_monthly",
    "sort_status",
    "trace_list",
    "unit_summary",
    "wear_frame",
    "window_rows",
    "window_spectrum",
]
