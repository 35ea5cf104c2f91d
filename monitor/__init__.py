"""drivespan: condition monitoring and drive-life estimates for fleets of closed-loop
hydrostatic drives.

This package is the product; the ``drivespan`` command and the dashboard are thin skins
over the Python API below. Every number it gives is an estimate: the makers' service
limits, local codes and qualified technicians decide, and pressurised hydraulic systems
are dangerous to work on.

The API (loaded on first use, so that importing :mod:`monitor` is fast):

- :func:`open_store` — create or upgrade a store by URL and return its engine
- :func:`import_registry` — import a fleet registry (YAML text or bytes)
- :func:`ingest_paths` / :func:`upload` — validate and store telemetry files or bytes
- :func:`fleet_status` / :func:`rank_records` — every drive's status at an as-of date
- :func:`unit_report` — one unit's status and detail
- :func:`make_plan` — the rebuild plan within the shop's capacity
- :func:`recompute` — rebuild the damage ledger after a model or registry change
- :func:`add_service_event` — record a rebuild, replacement or hour-meter change
- :func:`calibrate` — the fleet's own lives against the rating (Weibull fits, a
  suggested life factor); :func:`accept_life_factor` / :func:`undo_life_factor`
- :func:`fit_weibull` — two-parameter Weibull by maximum likelihood with right censoring
- :class:`DomainError` — what a refused request raises, with a message for the user

Layers, bottom up: :mod:`monitor.domain` (record types), :mod:`monitor.models` (physics,
numpy only), :mod:`monitor.ingest` (files to records), :mod:`monitor.ledger` (life-model
results per upload), :mod:`monitor.fleet` and :mod:`monitor.planning` (status, ranking,
plan; pure), :mod:`monitor.exports`, :mod:`monitor.store` (all SQL),
:mod:`monitor.usecases` (transactions), :mod:`monitor.cli`.
"""

from __future__ import annotations

import importlib
import logging

# A library logs, the application decides where to: without this, Python would print
# drivespan's warnings and tracebacks on stderr when the application configures nothing.
logging.getLogger(__name__).addHandler(logging.NullHandler())

_API = {
    "open_store": ("monitor.usecases.common", "init_db"),
    "import_registry": ("monitor.usecases.registry", "import_registry"),
    "ingest_paths": ("monitor.usecases.telemetry", "ingest_paths"),
    "upload": ("monitor.usecases.telemetry", "upload"),
    "recompute": ("monitor.usecases.telemetry", "recompute"),
    "fleet_status": ("monitor.usecases.status", "fleet_status"),
    "rank_records": ("monitor.usecases.status", "rank_records"),
    "unit_report": ("monitor.usecases.status", "unit_report"),
    "make_plan": ("monitor.usecases.plan", "make_plan"),
    "add_service_event": ("monitor.usecases.events", "add_service_event"),
    "calibrate": ("monitor.usecases.calibration", "calibrate"),
    "accept_life_factor": ("monitor.usecases.calibration", "accept_life_factor"),
    "undo_life_factor": ("monitor.usecases.calibration", "undo_life_factor"),
    "fit_weibull": ("monitor.models.weibull", "fit_weibull"),
    "DomainError": ("monitor.domain.errors", "DomainError"),
}

__all__ = sorted(_API)


def __getattr__(name: str) -> object:
    if name in _API:
        module, attr = _API[name]
        value = getattr(importlib.import_module(module), attr)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_API))
