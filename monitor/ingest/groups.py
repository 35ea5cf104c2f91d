"""Rows of a histogram table grouped per histogram and sorted by band (:class:`Groups`)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor.ingest.common import HIST_TEXT, Table, group_ids

SORTED = ("pressure_low", "pressure_high", "speed_low", "speed_high", "hours")


@dataclass
class Groups:
    """Rows sorted by (histogram, pressure low, speed low) and each histogram's slice.

    ``order`` maps sorted position -> table row; ``starts``/``ends`` bound each
    histogram in sorted order (histograms numbered by first appearance in the file);
    ``first`` is the table row of each histogram's first sorted row, ``gs`` the
    histogram number of each sorted row, ``same`` whether a sorted row continues the
    histogram of the row before it, ``d2`` whether it is a pressure_speed row and
    ``col`` the :data:`SORTED` columns in sorted order.
    """

    order: np.ndarray
    starts: np.ndarray
    ends: np.ndarray
    first: np.ndarray
    gs: np.ndarray
    same: np.ndarray
    d2: np.ndarray
    col: dict[str, np.ndarray]
    in_order: bool  # the table rows were already sorted: ``order`` is the identity

    @classmethod
    def of(cls, t: Table, is2d: np.ndarray) -> Groups:
        gid = group_ids([t.text[k][0] for k in HIST_TEXT])
        order = band_order(gid, t.num["pressure_low"], t.num["speed_low"])
        in_order = order is None
        order = np.arange(t.n) if in_order else order
        gs_ = gid if in_order else gid[order]
        brk = gs_[1:] != gs_[:-1]
        starts = np.flatnonzero(np.r_[True, brk])
        ends = np.r_[starts[1:], len(order)]
        gs = np.repeat(np.arange(len(starts)), ends - starts)
        col = {f: _own(t.num[f]) if in_order else t.num[f][order] for f in SORTED}
        d2 = is2d if in_order else is2d[order]
        return cls(order, starts, ends, order[starts], gs, np.r_[False, ~brk], d2, col, in_order)

    def sort(self, values: np.ndarray) -> np.ndarray:
        """Per-row ``values`` in sorted order."""
        return values if self.in_order else values[self.order]


def _own(values: np.ndarray) -> np.ndarray:
    """``values`` itself if it owns its memory, else a copy (records must not keep a view
    of the whole parsed frame alive)."""
    return values if values.base is None else values.copy()


def band_order(gid: np.ndarray, low: np.ndarray, speed: np.ndarray) -> np.ndarray | None:
    """Row order by (gid, low, speed), stable: ``np.lexsort((speed, low, gid))``.

    None if the rows are in that order already. The two float keys are replaced by their
    dense ranks (NaN last, as in a sort) and combined with ``gid`` into one int64 key,
    whose stable argsort is much faster than a three-key lexsort and gives the same order.
    """
    lr, ln = _dense_ranks(low)
    sr, sn = _dense_ranks(speed)
    if (int(gid.max(initial=0)) + 1) * ln * sn >= 2**62:
        return np.lexsort((speed, low, gid))
    key = gid * (ln * sn) + lr * sn + sr
    if np.all(key[1:] >= key[:-1]):  # already in order, as most exports are
        return None
    return np.argsort(key, kind="stable")


def _dense_ranks(x: np.ndarray) -> tuple[np.ndarray, int]:
    """Rank of each value among the distinct values of ``x`` (NaN last) and their count."""
    codes, uniq = pd.factorize(x + 0.0, use_na_sentinel=False)  # + 0.0: -0.0 equals 0.0
    rank = np.empty(len(uniq), dtype=np.int64)
    rank[np.argsort(uniq, kind="stable")] = np.arange(len(uniq))
    return rank[codes], max(len(uniq), 1)
