"""Unit detail: the builders behind one unit's view (life curve, case-drain table,
window spectrum, relief per month, oil samples, plain-words summary).

Pure: DataFrames and records in, DataFrames and sentences out; the status arithmetic
they lean on lives in :mod:`monitor.fleet`. All numbers are estimates.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
import pandas as pd

from monitor.domain.notices import ESTIMATE_NOTICE  # noqa: F401 - re-exported
from monitor.domain.vocabulary import LIMIT_REACHED, NEW_LIFE
from monitor.fleet.params import (
    FLAG_FEW,
    FLAG_KAPPA_FLOOR,
    FLAG_LIFE_BEFORE,
    FLAG_OFF_REFERENCE,
    FLAG_OIL_NOT_APPLIED,
    FLAG_RELIEF,
    FLAG_STALE,
    FLAG_STEP,
    StatusParams,
)
from monitor.fleet.wear_status import (
    _fit,
    _num,
    case_drain_limit_lpm,
    normalised_case_drain,
    oil_viscosity_line,
    readings_off_reference,
)
from monitor.models import bearings, oil, wear

# --- one unit in detail ----------------------------------------------------------------


def window_rows(life_rows: pd.DataFrame, rate_window_h: float) -> pd.DataFrame:
    """The most recent ledger rows whose operating hours add up to the rate window [h]."""
    if life_rows.empty:
        return life_rows
    from_end = life_rows["hours"].to_numpy(float)[::-1].cumsum()[::-1]
    # keep rows up to and including the first (from the end) that reaches the window
    before = from_end - life_rows["hours"].to_numpy(float)
    return life_rows[before < rate_window_h]


def window_spectrum(hists: list) -> pd.DataFrame:
    """Hours per pressure band summed over histograms (speed bands summed out) [h]."""
    parts = []
    for h in hists:
        hours = np.asarray(h.hours, float)
        if hours.ndim == 2:
            hours = hours.sum(axis=1)
        parts.append(
            pd.DataFrame(
                {
                    "pressure_low_bar": h.pressure_low_bar,
                    "pressure_high_bar": h.pressure_high_bar,
                    "hours": hours,
                }
            )
        )
    if not parts:
        return pd.DataFrame(columns=["pressure_low_bar", "pressure_high_bar", "hours"])
    both = pd.concat(parts, ignore_index=True)
    return (
        both.groupby(["pressure_low_bar", "pressure_high_bar"], as_index=False)["hours"]
        .sum()
        .sort_values("pressure_low_bar", ignore_index=True)
    )


def life_curve(
    life_rows: pd.DataFrame, status_row: Mapping, params: StatusParams
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Consumed fraction per upload since the rebuild, and its projection to end of life.

    Returns
    -------
    tuple of pandas.DataFrame
        ``(hour_meter [h], consumed_fraction [-])`` per upload, and two rows from now to
        consumed fraction 1 at the current damage rate (empty without a rate).
    """
    a1 = float(bearings.reliability_factor(params.reliability_pct))
    life = pd.DataFrame(
        {
            "hour_meter": life_rows["hour_meter_end"].to_numpy(float),
            "consumed_fraction": life_rows["damage"].cumsum().to_numpy(float) / a1,
        }
    )
    rem = _num(status_row.get("remaining_bearing_h"))
    hm = _num(status_row.get("hour_meter"))
    proj = pd.DataFrame(columns=["hour_meter", "consumed_fraction"])
    if rem is not None and hm is not None:
        c = float(status_row["consumed_fraction"])
        proj = pd.DataFrame({"hour_meter": [hm, hm + rem], "consumed_fraction": [c, max(c, 1.0)]})
    return life, proj


def case_drain_detail(
    readings: pd.DataFrame,
    row: Mapping,
    rebuilt_at: object,
    status_row: Mapping,
    params: StatusParams,
) -> tuple[pd.DataFrame, wear.WearTrend | None]:
    """Every case-drain reading of a component (raw and normalised) and its current trend.

    Returns the table ``taken_at, hour_meter [h], case_drain_lpm [L/min], normalised_lpm
    [L/min], used`` (in the current life) ``, off_reference`` (taken too far from the
    model's test conditions: shown, not trended) and the trend of the readings that are
    used and not off the reference (None without one).
    """
    rd = readings[readings["case_drain_lpm"].notna()].reset_index(drop=True)
    dp, temp = (rd[c].to_numpy(float) for c in ("test_pressure_bar", "oil_temp_c"))
    norm = normalised_case_drain(
        rd["case_drain_lpm"].to_numpy(float), dp, temp, row, oil_viscosity_line(row)
    )
    used = (
        np.ones(len(rd), bool)
        if rebuilt_at is None
        else (rd["taken_at"] >= pd.Timestamp(rebuilt_at)).to_numpy()
    )
    table = pd.DataFrame(
        {
            "taken_at": rd["taken_at"],
            "hour_meter": rd["hour_meter"],
            "case_drain_lpm": rd["case_drain_lpm"],
            "normalised_lpm": np.asarray(norm, float),
            "used": used,
            "off_reference": readings_off_reference(dp, temp, row, params),
        }
    )
    trended = table["used"] & ~table["off_reference"]
    x = table.loc[trended, "hour_meter"].to_numpy(float)
    y = table.loc[trended, "normalised_lpm"].to_numpy(float)
    now = _num(status_row.get("hour_meter"))
    now = max(now if now is not None else -np.inf, x.max() if x.size else -np.inf)
    trend = _fit(x, y, case_drain_limit_lpm(row), now, params) if x.size else None
    if trend is not None and math.isnan(trend.slope):
        trend = None
    return table, trend


def relief_monthly(rows: pd.DataFrame) -> pd.DataFrame:
    """Relief hours, cut-off hours and relief heat per calendar month (UTC) of ledger rows."""
    cols = ["relief_hours", "cutoff_hours", "relief_heat_kwh"]
    if rows.empty:
        return pd.DataFrame(columns=["month", *cols])
    month = rows["period_end"].dt.tz_convert("UTC").dt.tz_localize(None).dt.to_period("M")
    g = rows.assign(month=month).groupby("month", as_index=False)[cols].sum()
    g["month"] = [p.to_timestamp().date() for p in g["month"]]
    return g


SAMPLE_COLUMNS = ["taken_at", "iso4406", "r4", "r6", "r14", "suggested_level"]

_LEVEL_NAME = {v: k for k, v in bearings.CONTAMINATION_LEVEL_NAMES.items()}


def suggested_level(code: str) -> str | None:
    """The ISO 281 level an ISO 4406 code suggests (descriptive name), or None.

    Only a suggestion: the >= 14 um number mapped by
    :data:`monitor.models.bearings.ISO4406_CLEANLINESS_MAP` (from memory, see there); the
    level in force is the registry's choice.
    """
    try:
        return _LEVEL_NAME[bearings.cleanliness_level_from_iso4406(code)]
    except ValueError:
        return None


def oil_samples(readings: pd.DataFrame) -> pd.DataFrame:
    """Oil cleanliness samples: taken_at, iso4406, its scale numbers (None for '-') and
    the ISO 281 level it suggests."""
    rd = readings[readings["iso4406"].notna()]
    rows = []
    for taken, code in zip(rd["taken_at"], rd["iso4406"], strict=True):
        try:
            r4, r6, r14 = oil.parse_iso4406(code)
        except ValueError:
            r4 = r6 = r14 = None
        rows.append(
            {"taken_at": taken, "iso4406": code, "r4": r4, "r6": r6, "r14": r14,
             "suggested_level": suggested_level(code)}
        )  # fmt: skip
    return pd.DataFrame(rows, columns=SAMPLE_COLUMNS)


ASSUMPTION_COLUMNS = [
    "position",
    "band_pressure",
    "oil_temp_c",
    "oil_factor_source",
    "contamination_level",
    "contamination_ec",
    "suggested_level",
    "kappa_floor_hours",
    "life_before_data",
]
"""Columns of :func:`assumption_table`."""


def assumption_table(
    status: pd.DataFrame, band_pressure: str, samples: Mapping[str, pd.DataFrame]
) -> pd.DataFrame:
    """Per drive, the model assumptions its figures rest on: the band pressure rule, the
    oil temperature of the oil factor [degC] and its source, the contamination level in
    force and its eC [-], the level the latest ISO 4406 sample suggests, hours at the aISO
    floor since the rebuild [h] and how the life before the first upload is counted."""
    rows = []
    for r in status.to_dict("records"):
        smp = samples.get(r["position"])
        latest = None if smp is None or smp.empty else smp["suggested_level"].iloc[-1]
        row = {k: r.get(k) for k in ASSUMPTION_COLUMNS}
        rows.append({**row, "band_pressure": band_pressure, "suggested_level": latest})
    return pd.DataFrame(rows, columns=ASSUMPTION_COLUMNS)


def _oil_sentence(r: Mapping) -> str | None:
    """What the oil-condition factor used, in words (None without bearing data)."""
    src = r.get("oil_factor_source")
    if not isinstance(src, str):  # None, or NaN where the drive has no ledger row yet
        return None
    where = {
        "upload": "the upload's period mean",
        "unit": "the registry's value for this unit",
        "model": "the component model's operating_temp_c",
    }
    if src == "none":
        text = "oil factor not applied (no operating oil temperature)"
    else:
        text = f"oil factor at {r['oil_temp_c']:.0f} degC ({where[src]})"
    return (
        f"  {r['position']}: {text}; contamination level {r['contamination_level']} "
        f"(eC {r['contamination_ec']:.2f})."
    )


_FLAG_TEXT = {
    FLAG_STALE: "no upload for {age} days: the estimate may be out of date",
    FLAG_STEP: "the latest case-drain reading jumped above {step:g} times the trend "
    "of the {before} or more readings before it: check for sudden damage",
    FLAG_RELIEF: "{rel:.1f} h at relief pressure in the rate window and no pressure "
    "cut-off: heavy heat load on the oil (relief heat {heat} is an upper bound: full "
    "stall flow assumed in every band at relief)",
    FLAG_FEW: "{few}",
    FLAG_OFF_REFERENCE: "{off} case-drain reading(s) taken more than {dist:g} K from the "
    "model's test temperature or at a test pressure outside {lo:g}-{hi:g} times the "
    "model's test pressure are shown but left out of the trend and the step check "
    "(settings case_drain_temp_distance_k, case_drain_dp_ratio_min/max)",
    FLAG_OIL_NOT_APPLIED: "the model has bearing data but neither the upload, the unit nor "
    "the component model gives an operating oil temperature: the ISO 281 oil factor is "
    "not applied (a_oil = 1); set operating_temp_c in the registry or send oil_temp",
    FLAG_KAPPA_FLOOR: "{floor:,.0f} h since the rebuild ran with a viscosity ratio kappa "
    "below 0.1, where ISO 281 gives no aISO: damage there is counted at the table's floor "
    "(aISO 0.1), a cautious value",
    FLAG_LIFE_BEFORE: "no rebuild recorded and the first upload starts at {first:,.0f} h on "
    "the hour meter: the life used before it is unknown and not counted; give "
    "consumed_at_first_upload or last_rebuild_hour_meter in the registry",
}


def _few_text(r: Mapping, params: StatusParams) -> str:
    n = int(r.get("n_wear_readings", 0) or 0)
    if n < params.min_wear_readings:
        return (
            f"fewer than {params.min_wear_readings} trended case-drain readings since the "
            "last rebuild: no wear trend yet"
        )
    return (
        f"{n} trended case-drain readings give a wear trend but no 95 % range: the widest "
        f"range {n} readings can give is short of 95 % (at least 5 readings at distinct "
        "hour meters are needed), so no range is claimed"
    )


def _sentence(r: Mapping, params: StatusParams) -> str:
    name = f"{r['position']} ({r['component_model']})"
    if r["limiting"] is None:
        if not r["hours_since_rebuild"]:
            return f"{name}: {NEW_LIFE} (no operating hours logged since the last rebuild)."
        return f"{name}: no estimate (no recent operation and no wear trend)."
    why = "bearing fatigue" if r["limiting"] == "bearing" else "case-drain wear reaching its limit"
    left = LIMIT_REACHED if r["remaining_h"] <= 0 else f"about {r['remaining_h']:,.0f} h left"
    text = (
        f"{name}: {left}, limited by {why}; "
        f"{100 * r['consumed_fraction']:.0f} % of bearing life used since the last "
        f"rebuild at {params.reliability_pct:g} % reliability"
    )
    if r["due_date"] is not None:
        text += (
            f"; due around {r['due_date'].isoformat()} at {r['utilisation_h_per_day']:.1f} h/day"
        )
    else:
        text += f"; no due date: no operating hours in the last {params.utilisation_days:g} days"
    return text + "."


def unit_summary(status: pd.DataFrame, params: StatusParams) -> list[str]:
    """Plain-words sentences on why each component of a unit stands where it does."""
    out = []
    for r in status.to_dict("records"):
        out.append(_sentence(r, params))
        oil_text = _oil_sentence(r)
        if oil_text is not None:
            out.append(oil_text)
        for flag in r["flags"]:
            out.append(f"  {r['position']}: " + _flag_sentence(flag, r, params))
    out.append(ESTIMATE_NOTICE)
    return out


def _flag_sentence(flag: str, r: Mapping, params: StatusParams) -> str:
    age, heat = r["data_age_days"], _num(r.get("relief_heat_kwh"))
    return _FLAG_TEXT[flag].format(
        age="no data" if age != age else f"{age:.0f}",
        step=params.case_drain_step_factor,
        before=params.step_min_before,
        rel=r["relief_hours"],
        heat="unknown" if heat is None else f"{heat:,.0f} kWh",
        few=_few_text(r, params),
        off=int(r.get("n_wear_readings_off", 0) or 0),
        dist=params.case_drain_temp_distance_k,
        lo=params.case_drain_dp_ratio_min,
        hi=params.case_drain_dp_ratio_max,
        floor=_num(r.get("kappa_floor_hours")) or 0.0,
        first=(_num(r.get("hour_meter")) or 0.0) - (_num(r.get("hours_since_rebuild")) or 0.0),
    )


# --- pressure traces -------------------------------------------------------------------

TRACE_LIST_COLUMNS = [
    "position",
    "file",
    "started_at",
    "duration_s",
    "gaps_s",
    "peak_bar",
    "at_relief_s",
    "at_cutoff_s",
]
"""Columns of :func:`trace_list` before the cycles per hour and the notes."""


def trace_list(positions: list[str], docs: list[dict]) -> pd.DataFrame:
    """One row per stored trace summary: start, length, gaps left out, peak, time at the
    relief and at the cut-off [s], cycles per operating hour with a range at or above each
    level (``cycles_per_h_ge_<L>bar`` [1/h]) and the notes joined by blank lines."""
    rows = []
    for pos, doc in zip(positions, docs, strict=True):
        stalls = doc.get("stalls") or {}
        row = {
            "position": pos,
            "file": doc.get("file"),
            "started_at": doc.get("period_start"),
            "duration_s": doc.get("duration_s"),
            "gaps_s": doc.get("gap_total_s"),
            "peak_bar": doc.get("max_high_side_bar"),
            "at_relief_s": stalls.get("at_relief_s"),
            "at_cutoff_s": stalls.get("at_cutoff_s"),
        }
        cycles = doc.get("cycles") or {}
        for level, n in zip(cycles.get("levels_bar", []), cycles.get("per_hour", []), strict=True):
            row[f"cycles_per_h_ge_{level:g}bar"] = n
        row["notes"] = "\n\n".join(doc.get("notes") or [])
        rows.append(row)
    if not rows:
        return pd.DataFrame(columns=[*TRACE_LIST_COLUMNS, "notes"])
    return pd.DataFrame(rows)
