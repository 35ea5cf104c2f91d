"""Use cases: one function per thing a user does; transactions begin here.

The command line and the dashboard call these (directly or through the documented
package API in :mod:`monitor`). Modules: :mod:`~monitor.usecases.common` (results,
errors, opening a store), :mod:`~monitor.usecases.registry`,
:mod:`~monitor.usecases.telemetry`, :mod:`~monitor.usecases.settings`,
:mod:`~monitor.usecases.status`, :mod:`~monitor.usecases.events`,
:mod:`~monitor.usecases.plan`, :mod:`~monitor.usecases.demo`,
:mod:`~monitor.usecases.calibration`, :mod:`~monitor.usecases.traces`,
:mod:`~monitor.usecases.maintenance` (backup, restore, the URL as shown),
:mod:`~monitor.usecases.access` (the dashboard password).

The public names are gathered here and loaded on first use (PEP 562), so that a command
that only prints its help does not import the database layer or pandas.
"""

from __future__ import annotations

import importlib

_WHERE = {
    "ACCEPTED": "common",
    "accept_life_factor": "calibration",
    "calibrate": "calibration",
    "calibration_records": "calibration",
    "CALIBRATION_COLUMNS": "calibration",
    "CALIBRATION_MODES": "calibration",
    "probability_plot": "calibration",
    "factors_in_force": "calibration",
    "lives": "calibration",
    "proposed_change": "calibration",
    "rating_history": "calibration",
    "undo_life_factor": "calibration",
    "DUPLICATE": "common",
    "REJECTED": "common",
    "VALID": "common",
    "DomainError": "common",
    "FileResult": "common",
    "init_db": "common",
    "SERVICE_KINDS": "events",
    "SERVICE_REASONS": "events",
    "add_service_event": "events",
    "REGISTRY_SUFFIXES": "registry",
    "complete_oil_viscosities": "registry",
    "has_registry": "registry",
    "import_registry": "registry",
    "show_registry": "registry",
    "DEFAULT_SETTINGS": "settings",
    "get_settings": "settings",
    "save_settings": "settings",
    "BAND_PRESSURE_CHOICES": "settings",
    "LEDGER_SETTINGS": "settings",
    "RECOMPUTE_NEEDED": "settings",
    "ledger_stale": "settings",
    "ComponentDetail": "status",
    "UnitReport": "status",
    "RANK_COLUMNS": "status",
    "fleet_status": "status",
    "plain_records": "status",
    "plain_value": "status",
    "rank_records": "status",
    "status_instant": "status",
    "unit_report": "status",
    "backup_store": "maintenance",
    "display_url": "maintenance",
    "restore_store": "maintenance",
    "hash_password": "access",
    "is_loopback": "access",
    "read_password_file": "access",
    "verify_password": "access",
    "PASSWORD_HASH_ENV": "access",
    "TELEMETRY_SUFFIXES": "telemetry",
    "expand_paths": "telemetry",
    "ingest_bytes": "telemetry",
    "ingest_large": "telemetry",
    "ingest_paths": "telemetry",
    "recompute": "telemetry",
    "upload": "telemetry",
    "upload_path": "telemetry",
    "TraceFileResult": "traces",
    "ingest_trace": "traces",
    "trace_sidecar": "traces",
}

__all__ = sorted(_WHERE)


def __getattr__(name: str) -> object:
    if name in _WHERE:
        value = getattr(importlib.import_module(f"monitor.usecases.{_WHERE[name]}"), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_WHERE))
