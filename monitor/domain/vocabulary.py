"""The words every output uses for a drive's status (one vocabulary for every page,
chart, table and setting)."""

STATUS_BANDS = ("act now", "due soon", "plan ahead", "healthy")
"""Status bands in order of urgency, most urgent first."""

NO_ESTIMATE = "no estimate"
"""Status of a component without a remaining-hours estimate."""

SERVICE_REASONS = ("failure", "wear_limit", "preventive", "other")
"""Why a rebuild or replacement ended a drive's life: bearing or rotating-group failure
found, case-drain wear limit reached, taken out while still serviceable, anything else."""

MISSING_REASON = "other"
"""Reason read for a rebuild or replacement recorded without one."""

FLAG_WORDS = {
    "stale": "stale data",
    "case_drain_step": "case-drain step",
    "heavy_relief": "heavy relief use",
    "few_wear_readings": "few drain readings",
    "wear_readings_off_reference": "drain readings off test conditions",
    "oil_factor_not_applied": "oil factor not applied",
    "kappa_below_range": "oil too thin for ISO 281 (floor used)",
    "life_before_data_unknown": "life before first upload unknown",
}
"""How each status flag (the ``flags`` keys of ``rank``) reads in tables and pages."""

NEW_LIFE = "new life, no estimate yet"
"""What a drive reads after a rebuild or replacement before any operating hours are
logged (instead of the plain :data:`NO_ESTIMATE`)."""

LIMIT_REACHED = "limit reached"
"""What the remaining hours read once they are used up (instead of "0 h left")."""


def plural(n: int, one: str, many: str | None = None) -> str:
    """``"1 drive"``, ``"3 drives"``: a count with its noun in the right number."""
    return f"{n:,} {one if n == 1 else (many or one + 's')}"
