"""Write the demo fleet in the documented export formats (registry YAML, CSV exports)."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import yaml

from demo_fleet import duty
from demo_fleet.history import UnitHistory
from demo_fleet.readings import READING_COLUMNS
from demo_fleet.scenario import COMPONENT_MODELS, OIL

HISTOGRAM_COLUMNS = (
    "unit",
    "position",
    "period_start",
    "period_end",
    "hour_meter_start",
    "hour_meter_end",
    "quantity",
    "pressure_low_bar",
    "pressure_high_bar",
    "speed_low_rpm",
    "speed_high_rpm",
    "hours",
    "mean_speed_rpm",
)


def slug(name: str) -> str:
    """File-name form of a site name: lower case, words joined by '-'."""
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-")


def stamp(day: np.datetime64, hour: int = 0, minute: int = 0) -> str:
    """ISO 8601 UTC timestamp with ``Z`` for a day and time of day."""
    return f"{np.datetime_as_string(day)}T{hour:02d}:{minute:02d}:00Z"


def _position_rows(hist: UnitHistory, p_index: int) -> dict[str, np.ndarray]:
    """Column arrays of every non-empty band of one position's daily uploads."""
    pos = hist.positions[p_index]
    counts = np.where(hist.upload.reshape((-1,) + (1,) * (pos.counts.ndim - 1)), pos.counts, 0)
    idx = np.nonzero(counts)
    d = idx[0]
    cols = {
        "day": d,
        "pos": np.full(d.size, p_index),
        "band": idx[1],
        "speed_band": idx[2] if counts.ndim == 3 else np.full(d.size, -1),
        "ticks": counts[idx],
        "mean_speed": pos.speed_rpm[d] if pos.speed_rpm is not None else np.full(d.size, -1.0),
    }
    return cols


def _nullable(values: np.ndarray, present: np.ndarray) -> pd.arrays.IntegerArray:
    """Integer column that is blank where ``present`` is False."""
    return pd.arrays.IntegerArray(np.rint(values).astype(np.int64), ~present)


def unit_histogram_frame(hist: UnitHistory, day_strings: np.ndarray) -> pd.DataFrame:
    """All histogram rows of one unit, ordered by day, position, band, speed band."""
    parts = [_position_rows(hist, i) for i in range(len(hist.positions))]
    cols = {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}
    order = np.lexsort((cols["speed_band"], cols["band"], cols["pos"], cols["day"]))
    cols = {k: v[order] for k, v in cols.items()}
    d = cols["day"]
    start = hist.meter_start_tenths()
    end = start + hist.tenths
    names = np.array([p.position for p in hist.positions], dtype=object)
    matrix = cols["speed_band"] >= 0
    sb = np.maximum(cols["speed_band"], 0)
    speed = cols["mean_speed"]
    return pd.DataFrame(
        {
            "day": d,
            "unit": hist.plan.tag,
            "position": names[cols["pos"]],
            "period_start": day_strings[d],
            "period_end": day_strings[d + 1],
            "hour_meter_start": start[d] / 10.0,
            "hour_meter_end": end[d] / 10.0,
            "quantity": np.where(matrix, "pressure_speed", "pressure"),
            "pressure_low_bar": duty.LOW_BAR[cols["band"]].astype(np.int64),
            "pressure_high_bar": duty.HIGH_BAR[cols["band"]].astype(np.int64),
            "speed_low_rpm": _nullable(duty.SPEED_EDGES_RPM[:-1][sb], matrix),
            "speed_high_rpm": _nullable(duty.SPEED_EDGES_RPM[1:][sb], matrix),
            "hours": cols["ticks"] / 100.0,
            "mean_speed_rpm": _nullable(speed, speed >= 0),
        }
    )


def write_site_months(
    frame: pd.DataFrame, days: np.ndarray, site_slug: str, folder: Path
) -> list[tuple[str, Path]]:
    """Write one histogram CSV per calendar month; returns (month, path) pairs."""
    frame = frame.sort_values(["day", "unit", "position"], kind="stable")
    month = days.astype("datetime64[M]")[frame["day"].to_numpy()]
    month_str = np.datetime_as_string(month)
    cuts = np.flatnonzero(month_str[1:] != month_str[:-1]) + 1
    bounds = np.concatenate(([0], cuts, [len(frame)]))
    out = []
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):
        if b <= a:
            continue
        path = folder / f"{month_str[a]}_{site_slug}.csv"
        frame.iloc[a:b].to_csv(
            path, columns=list(HISTOGRAM_COLUMNS), index=False, lineterminator="\n"
        )
        out.append((str(month_str[a]), path))
    return out


def write_readings(rows: list[tuple], path: Path) -> None:
    """Write one site's readings CSV, ordered by time, unit and position."""
    frame = pd.DataFrame(rows, columns=list(READING_COLUMNS))
    frame = frame.sort_values(["taken_at", "unit", "position"], kind="stable")
    frame.to_csv(path, index=False, lineterminator="\n")


def _service_entries(hist: UnitHistory, days: np.ndarray, meter0_tenths: int) -> list[dict]:
    """Service history of one unit: start-of-monitoring overhauls, then rebuilds."""
    service = []
    if meter0_tenths > 0:  # drives overhauled when the monitoring started
        for i, pos in enumerate(hist.positions):
            kind = "rebuild" if (hist.plan.index + i) % 3 else "replacement"
            service.append(
                {
                    "position": pos.position,
                    "kind": kind,
                    "at": stamp(days[0] - 1, 12),
                    "hour_meter": meter0_tenths / 10,
                    "reason": "preventive",
                }
            )
    starts = hist.meter_start_tenths()
    for ev in sorted(hist.events, key=lambda e: (e.day, e.position)):
        service.append(
            {
                "position": ev.position,
                "kind": ev.kind,
                "at": stamp(days[ev.day], ev.hour),
                "hour_meter": float(starts[ev.day]) / 10.0,
                "reason": ev.reason,
            }
        )
    return service


def registry_document(
    histories: list[UnitHistory], days: np.ndarray, meter0: dict[str, int]
) -> dict:
    """The fleet registry as a plain dict in the documented YAML shape."""
    sites: list[str] = []
    units = []
    for hist in histories:
        plan = hist.plan
        if plan.site.name not in sites:
            sites.append(plan.site.name)
        components = [
            {"position": p.position, "model": p.model["name"], "serial": p.serial}
            for p in hist.positions
        ]
        units.append(
            {
                "tag": plan.tag,
                "site": plan.site.name,
                "machine_type": plan.machine.name,
                "oil": OIL["name"],
                "components": components,
                "service": _service_entries(hist, days, meter0[plan.tag]),
            }
        )
    return {
        "oils": [dict(OIL)],
        "component_models": [dict(m) for m in COMPONENT_MODELS],
        "sites": [{"name": s} for s in sites],
        "units": units,
    }


def write_registry(doc: dict, path: Path) -> None:
    """Write the registry YAML with a short header comment."""
    header = (
        "# drivespan demo fleet registry: an invented scenario, every name is made up.\n"
        "# Rating data are plausible estimates, not any maker's figures.\n"
    )
    body = yaml.safe_dump(doc, sort_keys=False, default_flow_style=False, width=100)
    path.write_text(header + body, encoding="utf-8")
