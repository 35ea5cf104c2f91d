"""Use cases of calibration: the fleet's own lives against the rating, and life factors.

:func:`calibrate` fits each component model's lives (from the damage ledger and the
rebuild and replacement reasons) and suggests a life factor; :func:`accept_life_factor`
records a suggestion as a dated, reversible change of the model's rating and recomputes
the ledger; :func:`undo_life_factor` takes the newest one back. The registry import
never touches these changes: an accepted factor multiplies whatever rated L10 the
registry holds, and the outputs say so.

A suggested factor is an estimate from the fleet's history; the maker's ratings and
service limits and a qualified engineer decide whether to accept it.
"""

from __future__ import annotations

import json
import math

import pandas as pd

from monitor.fleet import calibration as cal
from monitor.fleet.lives import component_lives
from monitor.store import ledger_rows, life_reads, rating_changes
from monitor.store.db import Engine
from monitor.usecases.common import DomainError, locked_transaction
from monitor.usecases.settings import ledger_compute, mark_ledger_current

calibration_records = cal.table_records
"""Rows of a :func:`calibrate` table as plain dicts (NaN as None), ready for JSON."""

CALIBRATION_COLUMNS = cal.CALIBRATION_COLUMNS
CALIBRATION_MODES = tuple(cal.MODES)

DEFAULT_PROPOSER = "drivespan calibrate"
"""Recorded as ``proposed_by`` when the caller names no one."""


def _check_names(conn, model: str | None, site: str | None) -> None:  # noqa: ANN001
    models = rating_changes.model_ids(conn)
    if model is not None and model not in models:
        known = ", ".join(sorted(models)) or "none registered"
        raise DomainError(f"component model {model!r} is not in the registry (known: {known})")
    if site is not None:
        from monitor.store import queries

        sites = queries.site_names(conn)
        if site not in sites:
            raise DomainError(f"site {site!r} is not in the registry (known: {', '.join(sites)})")


def lives(engine: Engine, model: str | None = None, site: str | None = None) -> pd.DataFrame:
    """Every component life (ended and running) with its consumed fraction and hours.

    See :func:`monitor.fleet.lives.component_lives` for the columns.
    """
    with engine.connect() as conn:
        _check_names(conn, model, site)
        rows = life_reads.life_ledger(conn, model, site)
        events = life_reads.life_events(conn, model, site)
    return component_lives(rows, events)


def factors_in_force(engine: Engine) -> pd.DataFrame:
    """The accepted life factor in force per component model: ``component_model, factor,
    proposed_by, data_summary, accepted_at`` (models without one absent)."""
    with engine.connect() as conn:
        return rating_changes.in_force(conn).drop(columns=["id", "undone_at"])


def rating_history(engine: Engine) -> pd.DataFrame:
    """Every accepted life factor, undone ones included, oldest first."""
    with engine.connect() as conn:
        return rating_changes.history(conn)


def _factor_note(row: pd.Series) -> str:
    day = row["accepted_at"].date().isoformat()
    return (
        f"life factor {row['factor']:.3g} accepted {day} is in force on top of the registry's "
        "rated L10 (it wins over any registry import); a suggestion here multiplies it"
    )


def calibrate(
    engine: Engine,
    model: str | None = None,
    site: str | None = None,
    by_site: bool = False,
    confidence: float = cal.DEFAULT_CONFIDENCE,
) -> pd.DataFrame:
    """Model against field: Weibull fits per component model (and site) and mode.

    Returns the table of :func:`monitor.fleet.calibration.calibration_table`; a model
    with a life factor in force says so in ``note``. Raises DomainError for an unknown
    model or site or a confidence outside (0, 1).
    """
    table_lives = lives(engine, model, site)
    try:
        table = cal.calibration_table(table_lives, by_site=by_site, confidence=confidence)
    except ValueError as exc:
        raise DomainError(str(exc)) from None
    in_force = factors_in_force(engine).set_index("component_model")
    for i, name in table["component_model"].items():
        if name in in_force.index:
            extra = _factor_note(in_force.loc[name])
            note = table.at[i, "note"]
            table.at[i, "note"] = f"{note}; {extra}" if note else extra
    return table


def probability_plot(
    engine: Engine,
    model: str,
    mode: str = cal.FACTOR_MODE,
    site: str | None = None,
    confidence: float = cal.DEFAULT_CONFIDENCE,
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Points and fitted line with bounds of ``model``'s Weibull probability plot.

    See :func:`monitor.fleet.calibration.probability_frames`.
    """
    if mode not in cal.MODES:
        raise DomainError(f"mode must be one of {', '.join(cal.MODES)}, got {mode!r}")
    try:
        return cal.probability_frames(lives(engine, model, site), mode, confidence)
    except ValueError as exc:
        raise DomainError(str(exc)) from None


def proposed_change(engine: Engine, model: str, confidence: float = cal.DEFAULT_CONFIDENCE) -> dict:
    """What accepting the suggested life factor of ``model`` would change (nothing written).

    Returns a dict: ``component_model, suggested, suggested_low, suggested_high, failures,
    suspensions, confidence, factor_now`` (1.0 when none in force), ``factor_new``
    (= factor_now x suggested), ``rated_l10_h`` (the registry's) and
    ``effective_l10_h_now`` / ``effective_l10_h_new`` [h]. Raises DomainError when there
    is no suggestion, with the table's reason.
    """
    table = calibrate(engine, model=model, confidence=confidence)
    rows = table[table["mode"] == cal.FACTOR_MODE]
    if rows.empty or rows.iloc[0]["suggested_life_factor"] is None:
        why = rows.iloc[0]["note"] if not rows.empty else "no lives with ledger data"
        raise DomainError(f"no life factor to accept for {model}: {why}")
    row = rows.iloc[0]
    with engine.connect() as conn:
        now = rating_changes.factors_by_model_id(conn).get(rating_changes.model_ids(conn)[model])
        rated_h = rating_changes.registry_rating_h(conn, model)
    factor_now = 1.0 if now is None else now
    factor_new = factor_now * float(row["suggested_life_factor"])
    return {
        "component_model": model,
        "suggested": float(row["suggested_life_factor"]),
        "suggested_low": float(row["suggested_low"]),
        "suggested_high": float(row["suggested_high"]),
        "failures": int(row["failures"]),
        "suspensions": int(row["suspensions"]),
        "confidence": float(confidence),
        "factor_now": factor_now,
        "factor_new": factor_new,
        "rated_l10_h": rated_h,
        "effective_l10_h_now": rated_h * factor_now,
        "effective_l10_h_new": rated_h * factor_new,
    }


def accept_life_factor(
    engine: Engine,
    model: str,
    *,
    proposed_by: str = DEFAULT_PROPOSER,
    confidence: float = cal.DEFAULT_CONFIDENCE,
) -> dict:
    """Accept the suggested life factor of ``model``: record it and recompute the ledger.

    The recorded factor is the one in force times the suggestion (so it always applies to
    the registry's rated L10), with who proposed it and the data it rests on. Returns
    :func:`proposed_change`'s dict plus ``accepted_at``. Raises DomainError when there is
    no suggestion.
    """
    change = proposed_change(engine, model, confidence)
    if not (math.isfinite(change["factor_new"]) and change["factor_new"] > 0):
        raise DomainError(f"the suggested factor for {model} is not a positive number")
    summary = json.dumps({k: change[k] for k in change if k != "component_model"})
    with locked_transaction(engine) as conn:
        model_id = rating_changes.model_ids(conn)[model]
        when = rating_changes.insert(conn, model_id, change["factor_new"], proposed_by, summary)
        ledger_rows.recompute(conn, ledger_compute(conn))
        mark_ledger_current(conn)
    return {**change, "accepted_at": when}


def undo_life_factor(engine: Engine, model: str) -> dict:
    """Take back the newest life factor in force for ``model`` and recompute the ledger.

    Returns ``component_model, undone_factor, accepted_at, factor_now`` (the factor in
    force afterwards, 1.0 for none). Raises DomainError when none is in force.
    """
    with locked_transaction(engine) as conn:
        _check_names(conn, model, None)
        model_id = rating_changes.model_ids(conn)[model]
        undone = rating_changes.undo_latest(conn, model_id)
        if undone is None:
            raise DomainError(f"no life factor is in force for {model}: nothing to undo")
        ledger_rows.recompute(conn, ledger_compute(conn))
        mark_ledger_current(conn)
        after = rating_changes.factors_by_model_id(conn).get(model_id, 1.0)
    return {
        "component_model": model,
        "undone_factor": undone[0],
        "accepted_at": undone[1],
        "factor_now": after,
    }
