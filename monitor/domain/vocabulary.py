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
