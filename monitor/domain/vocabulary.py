"""The words every output uses for a drive's status (one vocabulary for every page,
chart, table and setting)."""

STATUS_BANDS = ("act now", "due soon", "plan ahead", "healthy")
"""Status bands in order of urgency, most urgent first."""

NO_ESTIMATE = "no estimate"
"""Status of a component without a remaining-hours estimate."""
