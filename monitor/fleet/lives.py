"""Component lives from the damage ledger: the input of the model-against-field fit.

A life runs from the first ledger row (or a rebuild or replacement) to the next rebuild
or replacement, which ends it with that event's reason; the last life of a component is
still running and therefore right-censored at its present values. Pure pandas/numpy.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

LIFE_COLUMNS = (
    "component_id",
    "unit",
    "position",
    "component_model",
    "site",
    "life",
    "ended",
    "ended_at",
    "reason",
    "uploads",
    "consumed_fraction",
    "operating_h",
)
"""Columns of :func:`component_lives`, in order."""

_KEYS = ["component_id", "unit", "position", "component_model", "site"]


def _life_index(ledger: pd.DataFrame, events: pd.DataFrame) -> np.ndarray:
    """Per ledger row, the number of life-starting events strictly before its period end."""
    index = np.zeros(len(ledger), dtype=np.int64)
    if events.empty or ledger.empty:
        return index
    ends = ledger["period_end"].to_numpy(dtype="datetime64[ns]")
    comps = ledger["component_id"].to_numpy()
    for comp, ev in events.groupby("component_id", sort=False):
        rows = np.flatnonzero(comps == comp)
        times = np.sort(ev["at"].to_numpy(dtype="datetime64[ns]"))
        index[rows] = np.searchsorted(times, ends[rows], side="left")
    return index


def component_lives(ledger: pd.DataFrame, events: pd.DataFrame) -> pd.DataFrame:
    """One row per component life with its consumed fraction and operating hours.

    Parameters
    ----------
    ledger : pandas.DataFrame
        Ledger rows: ``component_id, unit, position, component_model, site,
        period_end`` [UTC], ``hours`` [h], ``damage`` [-] (Miner damage at a1 = 1).
    events : pandas.DataFrame
        Rebuilds and replacements: ``component_id, at`` [UTC], ``reason``.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`LIFE_COLUMNS`: ``life`` (0 for the first life seen), ``ended``
        (bool), ``ended_at`` and ``reason`` of the event that ended it (NaT/None while
        running), ``uploads`` (ledger rows summed), ``consumed_fraction`` [-] and
        ``operating_h`` [h]. Lives without a ledger row (before the first data, or a
        life just started) are not listed: nothing is known of them.

    Notes
    -----
    A row with period end :math:`t_e` belongs to the life ended by the first event at
    :math:`t \\ge t_e`. The consumed fraction of a life is the Palmgren–Miner sum
    :math:`D = \\sum_j d_j` over its rows and the operating hours :math:`H = \\sum_j h_j`.

    References
    ----------
    Miner, M. A., Cumulative damage in fatigue, J. Appl. Mech. 12, 1945, A159–A164.
    """
    if ledger.empty:
        return pd.DataFrame(columns=list(LIFE_COLUMNS))
    rows = ledger.assign(life=_life_index(ledger, events))
    lives = (
        rows.groupby([*_KEYS, "life"], sort=True, dropna=False)
        .agg(
            uploads=("damage", "size"),
            consumed_fraction=("damage", "sum"),
            operating_h=("hours", "sum"),
        )
        .reset_index()
    )
    ordered = events.sort_values(["component_id", "at"], kind="stable").assign(
        life=lambda e: e.groupby("component_id").cumcount()
    )
    ended = ordered[["component_id", "life", "at", "reason"]].rename(columns={"at": "ended_at"})
    out = lives.merge(ended, on=["component_id", "life"], how="left")
    out["ended"] = out["ended_at"].notna()
    out["reason"] = out["reason"].astype(object).where(out["ended"], None)
    return out.loc[:, list(LIFE_COLUMNS)]
