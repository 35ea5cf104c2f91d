"""Settings, column names and flag names of the fleet status (shared by its modules)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import UTC, date, datetime

from monitor.models import lifecycle, wear

RANK_COLUMNS = (
    "unit",
    "site",
    "position",
    "component_model",
    "hour_meter",
    "hours_since_rebuild",
    "consumed_fraction",
    "damage_rate_per_h",
    "remaining_bearing_h",
    "remaining_wear_h",
    "remaining_wear_h_low",
    "remaining_wear_h_high",
    "remaining_h",
    "limiting",
    "utilisation_h_per_day",
    "due_date",
    "status",
    "relief_hours",
    "relief_heat_kwh",
    "last_upload_at",
    "data_age_days",
    "flags",
)
"""The stable keys of ``drivespan rank --format json``, in order."""

EXTRA_COLUMNS = (
    "machine_type",
    "component_id",
    "case_drain_level_lpm",
    "case_drain_limit_lpm",
    "case_drain_slope_lpm_per_h",
    "cutoff_hours",
    "has_cutoff",
    "n_wear_readings",
    "n_wear_readings_off",
    "oil_temp_c",
    "oil_factor_source",
    "contamination_level",
    "contamination_ec",
    "kappa_floor_hours",
    "life_before_data",
)
"""Further columns of the status frame (dashboard detail), after the rank keys."""

STATUS_COLUMNS = RANK_COLUMNS + EXTRA_COLUMNS

FLAG_STALE = "stale"
FLAG_STEP = "case_drain_step"
FLAG_RELIEF = "heavy_relief"
FLAG_FEW = "few_wear_readings"
FLAG_OFF_REFERENCE = "wear_readings_off_reference"
FLAG_OIL_NOT_APPLIED = "oil_factor_not_applied"
FLAG_KAPPA_FLOOR = "kappa_below_range"
FLAG_LIFE_BEFORE = "life_before_data_unknown"
FLAGS = (
    FLAG_STALE,
    FLAG_STEP,
    FLAG_RELIEF,
    FLAG_FEW,
    FLAG_OFF_REFERENCE,
    FLAG_OIL_NOT_APPLIED,
    FLAG_KAPPA_FLOOR,
    FLAG_LIFE_BEFORE,
)

LIFE_BEFORE_SOURCES = (
    "rebuild",
    "new_at_first_upload",
    "consumed_at_first_upload",
    "last_rebuild_hour_meter",
    "unknown",
)
"""How the life before a drive's first upload is counted: from a recorded rebuild; the
drive was new (hour meter at most ``life_before_data_h`` at its first upload); the
registry's consumed fraction; the hours since the registry's last known rebuild charged at
the damage rate of the first 30 logged days; or not at all (flag
``life_before_data_unknown``)."""

DEFAULT_LIMITS = dict(lifecycle.DEFAULT_STATUS_LIMITS_H)


@dataclass(frozen=True)
class StatusParams:
    """Settings of one status computation.

    Attributes
    ----------
    reliability_pct : float
        Planning reliability for ISO 281 a1 [%], 90-99.95.
    rate_window_h : float
        Operating hours over which the damage rate is taken [h].
    utilisation_days : float
        Calendar days over which utilisation is taken [d].
    stale_days : float
        Data older than this raises the ``stale`` flag [d].
    status_limits : mapping
        Remaining-hours limits of the status bands [h] (see :mod:`monitor.models.lifecycle`).
    case_drain_step_factor : float
        Latest normalised reading above this multiple of the fitted level before it
        raises ``case_drain_step`` [-] (1.5: common practice, no source).
    heavy_relief_fraction : float
        Share of window hours at relief, without a cut-off, that raises
        ``heavy_relief`` [-] (0.01: common practice, no source).
    min_wear_readings : int
        Fewest case-drain readings for a wear trend [-].
    case_drain_step_min_before : int
        Fewest trended readings before the latest for ``case_drain_step`` (never fewer
        than ``min_wear_readings``) [-] (4: a rule of this project, common practice, no
        source).
    case_drain_temp_distance_k : float
        Readings whose oil temperature is further than this from the model's test
        temperature are shown but not trended, and raise ``wear_readings_off_reference``
        [K] (20: common practice, no source).
    case_drain_dp_ratio_min, case_drain_dp_ratio_max : float
        Readings whose test pressure over the model's test pressure lies outside this
        range are shown but not trended [-] (0.5-2: common practice, no source).
    life_before_data_h : float
        A drive without a recorded rebuild whose first upload starts above this hour
        meter has an unknown life before the data, unless the registry gives it [h] (50:
        a new drive's run-in and delivery hours, common practice, no source).
    """

    reliability_pct: float = 90.0
    rate_window_h: float = 500.0
    utilisation_days: float = 30.0
    stale_days: float = 14.0
    status_limits: Mapping[str, float] = field(default_factory=lambda: dict(DEFAULT_LIMITS))
    case_drain_step_factor: float = 1.5
    heavy_relief_fraction: float = 0.01
    min_wear_readings: int = 3
    case_drain_step_min_before: int = 4
    case_drain_temp_distance_k: float = wear.REFERENCE_TEMP_DISTANCE_K
    case_drain_dp_ratio_min: float = wear.REFERENCE_DP_RATIO[0]
    case_drain_dp_ratio_max: float = wear.REFERENCE_DP_RATIO[1]
    life_before_data_h: float = 50.0

    @property
    def step_min_before(self) -> int:
        """Readings needed before the latest for the step flag [-]."""
        return max(self.case_drain_step_min_before, self.min_wear_readings)


def as_of_instant(as_of: date) -> datetime:
    """The start of the as-of day in UTC: data up to this instant count."""
    return datetime(as_of.year, as_of.month, as_of.day, tzinfo=UTC)
