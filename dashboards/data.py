"""The dashboard's only way to the store: monitor's service functions, cached.

One engine per database URL for the life of the server process
(``st.cache_resource``); frames are cached per question with a time-to-live and a
bounded number of entries (``st.cache_data``) and cleared after anything is
written (an upload or saved settings). No widgets are built in here.
"""

from __future__ import annotations

import hashlib
import logging
import os
import sys
from dataclasses import dataclass
from datetime import date

import pandas as pd
import streamlit as st

from dashboards import charts
from monitor import usecases
from monitor.domain.records import Problem
from monitor.usecases import outputs

ENV_URL = "DRIVESPAN_DB"
MAX_UPLOAD_MB = 50
"""Largest accepted upload [MB] (also the server's ``server.maxUploadSize``)."""
MAX_UPLOAD_BYTES = MAX_UPLOAD_MB * 1024 * 1024
FRAME_TTL_S = 600
"""How long a cached frame may be reused before it is read again [s]."""


def _log_to_server_console() -> None:
    """drivespan's warnings and internal errors (with tracebacks) go to the server's
    console (stderr of ``drivespan dashboard``), never to the page; added once."""
    logger = logging.getLogger("monitor")
    if not any(getattr(h, "drivespan_console", False) for h in logger.handlers):
        handler = logging.StreamHandler(sys.stderr)
        handler.drivespan_console = True
        handler.setFormatter(logging.Formatter("%(asctime)s %(name)s %(levelname)s %(message)s"))
        logger.addHandler(handler)
        logger.setLevel(logging.WARNING)


_log_to_server_console()


def db_url() -> str | None:
    """The database URL: ``--db URL`` after ``--`` on the command line, else $DRIVESPAN_DB."""
    args = sys.argv[1:]
    if "--db" in args and args.index("--db") + 1 < len(args):
        return args[args.index("--db") + 1]
    return os.environ.get(ENV_URL) or None


@st.cache_resource(show_spinner=False)
def engine(url: str | None) -> object:
    """The engine for ``url``, schema created or upgraded once per server process."""
    return usecases.init_db(url)


@st.cache_data(ttl=FRAME_TTL_S, max_entries=16, show_spinner="Ranking the fleet…")
def fleet(url: str | None, as_of: date, reliability_pct: float | None) -> pd.DataFrame:
    """Fleet status of every component (usecases.fleet_status), most urgent first."""
    return usecases.fleet_status(engine(url), as_of, reliability_pct=reliability_pct)


def due_weeks_figure(fleet: pd.DataFrame, as_of: date, weeks: int) -> object:
    """:func:`dashboards.charts.due_weeks_figure` of the fleet frame, built once for every
    session that shows the same fleet (a plotly figure takes about 0.1 s to build, half
    of the fleet page's server time; a filter change reruns the page).

    Keyed on the content of the columns the figure reads, so a new upload, setting or
    as-of day is seen as soon as the fleet frame shows it. Kept as the object itself
    (``st.cache_resource``): a pickled figure is validated again when loaded, which costs
    as much as building it. Streamlit only reads the figure (``to_dict``), so sessions can
    share it; callers must not change it.
    """
    cols = fleet[list(charts.DUE_WEEKS_COLUMNS)]
    digest = hashlib.sha256(pd.util.hash_pandas_object(cols, index=False).to_numpy().tobytes())
    return _due_weeks_figure(digest.hexdigest(), len(fleet), as_of, weeks, fleet)


@st.cache_resource(ttl=FRAME_TTL_S, max_entries=16, show_spinner=False)
def _due_weeks_figure(
    content: str, rows: int, as_of: date, weeks: int, _fleet: pd.DataFrame
) -> object:
    # _fleet (leading underscore: not hashed by Streamlit) is described by content and rows
    return charts.due_weeks_figure(_fleet, as_of, weeks=weeks)


@st.cache_data(ttl=FRAME_TTL_S, max_entries=32, show_spinner="Reading the unit…")
def unit_report(url: str | None, tag: str, as_of: date, reliability_pct: float | None) -> object:
    """usecases.unit_report for one unit (raises usecases.DomainError for an unknown tag)."""
    return usecases.unit_report(engine(url), tag, as_of, reliability_pct=reliability_pct)


@st.cache_data(ttl=FRAME_TTL_S, max_entries=4, show_spinner=False)
def settings(url: str | None) -> dict:
    """Stored settings overlaid on the defaults (usecases.get_settings)."""
    return usecases.get_settings(engine(url))


@st.cache_data(ttl=FRAME_TTL_S, max_entries=4, show_spinner=False)
def registry_text(url: str | None) -> str | None:
    """The text of the last imported fleet registry, or None."""
    return usecases.show_registry(engine(url))


def plan(url: str | None, as_of: date, reliability_pct: float | None, opts: PlanOptions) -> object:
    """A rebuild plan (monitor.planning) on the cached fleet status.

    Not cached itself: the plan holds read-only mappings that do not pickle, and
    planning a few thousand rows takes well under a second.
    """
    return outputs.plan_rebuilds(
        fleet(url, as_of, reliability_pct),
        as_of,
        horizon_weeks=opts.horizon_weeks,
        capacity_per_week=opts.capacity_per_week,
        site_capacity=dict(opts.site_capacity),
        exchange_stock=dict(opts.exchange_stock),
        turnaround_days=dict(opts.turnaround_days) if opts.exchange_stock else None,
        pair_within_h=opts.pair_within_h,
    )


@dataclass(frozen=True)
class PlanOptions:
    """The plan page's settings (kept in the session)."""

    horizon_weeks: int = 12
    capacity_per_week: int = 4
    site_capacity: tuple[tuple[str, int], ...] = ()
    exchange_stock: tuple[tuple[str, int], ...] = ()
    turnaround_days: tuple[tuple[str, float], ...] = ()
    pair_within_h: float | None = 500.0

    def key(self) -> tuple:
        """A hashable, cache-friendly form of these options."""
        return (
            self.horizon_weeks, self.capacity_per_week, self.site_capacity,
            self.exchange_stock, self.turnaround_days, self.pair_within_h,
        )  # fmt: skip

    @classmethod
    def from_key(cls, key: tuple) -> PlanOptions:
        return cls(*key)


def plan_options(url: str | None) -> PlanOptions:
    """The shop's stored plan settings (monitor.usecases.plan) as page options."""
    from monitor.usecases import plan as service_plan

    s = service_plan.get_plan_settings(engine(url))
    stock = tuple(sorted((str(k), int(v)) for k, v in (s["exchange_stock"] or {}).items()))
    ta = s.get("turnaround_days")
    if isinstance(ta, dict):
        turnaround = tuple(sorted((str(k), float(v)) for k, v in ta.items()))
    else:
        turnaround = tuple((m, float(ta if ta is not None else 21.0)) for m, _ in stock)
    return PlanOptions(
        horizon_weeks=int(s["horizon_weeks"]),
        capacity_per_week=int(s["capacity_per_week"]),
        site_capacity=tuple(sorted((str(k), int(v)) for k, v in s["site_capacity"].items())),
        exchange_stock=stock,
        turnaround_days=turnaround,
        pair_within_h=s["pair_within_h"],
    )


def save_plan_options(url: str | None, opts: PlanOptions) -> None:
    """Store page options as the shop's plan settings (raises DomainError if rejected)."""
    from monitor.usecases import plan as service_plan

    service_plan.save_plan_settings(
        engine(url),
        {
            "horizon_weeks": opts.horizon_weeks,
            "capacity_per_week": opts.capacity_per_week,
            "site_capacity": dict(opts.site_capacity),
            "exchange_stock": dict(opts.exchange_stock),
            "turnaround_days": dict(opts.turnaround_days) or 21.0,
            "pair_within_h": opts.pair_within_h,
        },
    )


@st.cache_data(ttl=FRAME_TTL_S, max_entries=8, show_spinner="Fitting the fleet's lives…")
def calibration(url: str | None, confidence: float) -> pd.DataFrame:
    """Model against field for every component model (usecases.calibrate)."""
    return usecases.calibrate(engine(url), confidence=confidence)


@st.cache_data(ttl=FRAME_TTL_S, max_entries=16, show_spinner=False)
def probability_plot(url: str | None, model: str, mode: str, confidence: float) -> tuple:
    """Points and fitted line of one model's probability plot (usecases.probability_plot)."""
    return usecases.probability_plot(engine(url), model, mode, confidence=confidence)


@st.cache_data(ttl=FRAME_TTL_S, max_entries=4, show_spinner=False)
def life_factors(url: str | None) -> pd.DataFrame:
    """Accepted life factors in force (usecases.factors_in_force)."""
    return usecases.factors_in_force(engine(url))


def proposed_change(url: str | None, model: str, confidence: float) -> dict:
    """What accepting ``model``'s suggested factor would change (nothing written)."""
    return usecases.proposed_change(engine(url), model, confidence)


def accept_life_factor(url: str | None, model: str, confidence: float) -> dict:
    """Accept the suggested life factor (recorded as proposed by the dashboard); clear caches."""
    done = usecases.accept_life_factor(
        engine(url), model, proposed_by="dashboard calibration page", confidence=confidence
    )
    clear()
    return done


def undo_life_factor(url: str | None, model: str) -> dict:
    """Take back the newest life factor of ``model``; clear caches."""
    done = usecases.undo_life_factor(engine(url), model)
    clear()
    return done


def clear() -> None:
    """Forget every cached frame (after an upload or a settings change)."""
    for fn in (fleet, unit_report, settings, registry_text, calibration, probability_plot,
               life_factors, _due_weeks_figure):  # fmt: skip
        fn.clear()


def upload(url: str | None, payload: bytes, name: str) -> usecases.FileResult:
    """Store one uploaded file through usecases.upload (the same path as ``drivespan
    ingest``: any error of the file becomes its refusal, logged to the server console);
    clear the caches if it changed data."""
    if len(payload) > MAX_UPLOAD_BYTES:
        size = len(payload) / 1024 / 1024
        problem = Problem(
            name, None, None, None,
            f"file is {size:.1f} MB, larger than the {MAX_UPLOAD_MB} MB limit: split the "
            "export into smaller files (for example one per month) and upload them one by one",
        )  # fmt: skip
        return usecases.FileResult(name, usecases.REJECTED, problems=(problem,))
    result = usecases.upload(engine(url), payload, name)
    if result.status == usecases.ACCEPTED:
        clear()
    return result


def ledger_stale(url: str | None) -> bool:
    """True when the ledger must be recomputed to follow the settings (not cached)."""
    return usecases.ledger_stale(engine(url))


def recompute(url: str | None) -> int:
    """Rebuild the damage ledger (usecases.recompute) and clear the caches."""
    n = usecases.recompute(engine(url))
    clear()
    return n


def save_settings(url: str | None, values: dict) -> dict:
    """Validate and store settings (usecases.save_settings) and clear the caches."""
    saved = usecases.save_settings(engine(url), values)
    clear()
    return saved
