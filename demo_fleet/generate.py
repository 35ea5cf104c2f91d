"""Seeded generator of the invented drivespan demo fleet.

Writes, into one folder::

    registry.yaml                         the fleet registry
    histograms/YYYY-MM_<site>.csv         daily time-at-pressure histograms, per site and month
    readings/<site>_checks.csv            monthly case-drain readings and oil samples
    broken_export.csv                     a deliberately faulty export that ingest must reject

The same seed, end date, length and scale always give byte-identical files. Run as
``python -m demo_fleet.generate OUT_DIR [--seed N] [--years Y] [--end-date YYYY-MM-DD]
[--scale S]``.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd

from demo_fleet import duty
from demo_fleet.history import UnitHistory, simulate_unit
from demo_fleet.readings import unit_readings
from demo_fleet.scenario import (
    REBUILT_RECENTLY_POSITION,
    SITES,
    STORIES,
    UnitPlan,
    select_roster,
)
from demo_fleet.writers import (
    HISTOGRAM_COLUMNS,
    registry_document,
    slug,
    unit_histogram_frame,
    write_readings,
    write_registry,
    write_site_months,
)

BROKEN_NAME = "broken_export.csv"
SUBFOLDERS = ("histograms", "readings")


@dataclass(frozen=True)
class GeneratedFleet:
    """What :func:`generate` wrote.

    ``export_paths`` are in the order to ingest (histograms month by month, then
    readings); ``broken_path`` is not among them. ``stories`` maps each story role to a
    unit tag, and ``rebuilt_recently`` to (tag, position). ``as_of`` is the day after
    ``end_date``. ``histograms`` counts the (unit, position, day) histograms written.
    """

    registry_path: Path
    export_paths: list[Path]
    broken_path: Path
    stories: dict[str, object]
    start_date: date
    end_date: date
    as_of: date
    units: int
    histograms: int
    sizes_bytes: dict[str, int] = field(default_factory=dict)


def _check_arguments(seed: int, end_date: date | None, years: float, units_scale: float) -> date:
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise ValueError(f"seed must be a non-negative integer, got {seed!r}")
    if not isinstance(years, int | float) or not 0.05 <= years <= 10:
        raise ValueError(f"years must be a number from 0.05 to 10, got {years!r}")
    if not isinstance(units_scale, int | float) or not 0 <= units_scale <= 1:
        raise ValueError(f"units_scale must be a number from 0 to 1, got {units_scale!r}")
    if end_date is None:
        return datetime.now(UTC).date()
    if isinstance(end_date, datetime) or not isinstance(end_date, date):
        raise ValueError(f"end_date must be a datetime.date (a day), got {end_date!r}")
    return end_date


def _meter_at_start(plan: UnitPlan, seed: int) -> int:
    """Hour meter of a unit at the first day [0.1 h]; some hire machines arrive new."""
    rng = np.random.default_rng([seed, 20_000 + plan.index])
    lo, hi = plan.site.meter_at_start_h
    if plan.site.calendar == "hire" and rng.random() < 0.3:
        return 0
    return int(round(rng.uniform(lo, hi) * 10.0))


def _simulate(roster: list[UnitPlan], seed: int, days: np.ndarray):
    """Histories of every unit and their starting hour meters [0.1 h]."""
    saturdays = {
        site.name: duty.site_saturdays(
            np.random.default_rng([seed, 10_000 + i]), days, site.calendar
        )
        for i, site in enumerate(SITES)
    }
    meter0 = {p.tag: _meter_at_start(p, seed) for p in roster}
    histories = [
        simulate_unit(p, seed, days, saturdays[p.site.name], meter0[p.tag]) for p in roster
    ]
    return histories, meter0


def _write_broken(hist: UnitHistory, days: np.ndarray, path: Path) -> None:
    """Two faulty histograms of one unit: overlapping bands; hours not matching the meter.

    Lines 2-5 hold a histogram whose band 40-75 bar overlaps 25-50 bar; lines 6-8 one
    whose hours (9.0 h) do not match its hour-meter difference (5.0 h).
    """
    day = max(0, days.size - 35)
    meter = hist.meter_start_tenths()[day] / 10.0
    start, end = f"{days[day]}T00:00:00Z", f"{days[day] + 1}T00:00:00Z"
    first, second = (p.position for p in (hist.positions * 2)[:2])
    bands_a = [(0, 25, 1.0), (25, 50, 2.0), (40, 75, 1.5), (75, 100, 0.5)]
    bands_b = [(0, 25, 3.0), (25, 50, 4.0), (50, 75, 2.0)]
    lines = [",".join(HISTOGRAM_COLUMNS)]
    for position, bands in ((first, bands_a), (second, bands_b)):
        for low, high, hours in bands:
            lines.append(
                f"{hist.plan.tag},{position},{start},{end},{meter},{meter + 5.0},pressure,"
                f"{low},{high},,,{hours},2250"
            )
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _write_all(
    histories: list[UnitHistory], meter0: dict[str, int], days: np.ndarray, seed: int, folder: Path
) -> tuple[list[Path], int]:
    """Write every file into ``folder``; returns exports in ingest order and histogram count."""
    for sub in SUBFOLDERS:
        (folder / sub).mkdir()
    day_strings = np.array(
        [f"{d}T00:00:00Z" for d in np.datetime_as_string(np.arange(days[0], days[-1] + 2))],
        dtype=object,
    )
    monthly: list[tuple[str, Path]] = []
    readings: list[Path] = []
    for site in SITES:
        site_hist = [h for h in histories if h.plan.site is site]
        if not site_hist:
            continue
        frame = pd.concat(
            [unit_histogram_frame(h, day_strings) for h in site_hist], ignore_index=True
        )
        monthly += write_site_months(frame, days, slug(site.name), folder / "histograms")
        rows = []
        for h in site_hist:
            rows += unit_readings(h, np.random.default_rng([seed, 30_000 + h.plan.index]), days)
        path = folder / "readings" / f"{slug(site.name)}_checks.csv"
        write_readings(rows, path)
        readings.append(path)
    write_registry(registry_document(histories, days, meter0), folder / "registry.yaml")
    silent = next(h for h in histories if h.plan.story == "silent")
    _write_broken(silent, days, folder / BROKEN_NAME)
    count = sum(
        int(np.count_nonzero(h.upload & (h.tenths > 0))) * len(h.positions) for h in histories
    )
    return [p for _, p in sorted(monthly, key=lambda mp: mp[0])] + readings, count


def _move_into(tmp: Path, out_dir: Path, paths: list[Path]) -> list[Path]:
    """Replace the previous generated files in ``out_dir`` by the new ones in ``tmp``."""
    for sub in SUBFOLDERS:
        target = out_dir / sub
        target.mkdir(exist_ok=True)
        for old in target.glob("*.csv"):
            old.unlink()
    moved = []
    for path in paths:
        dest = out_dir / path.relative_to(tmp)
        os.replace(path, dest)
        moved.append(dest)
    return moved


def generate(
    out_dir: Path,
    *,
    seed: int = 7,
    end_date: date | None = None,
    years: float = 3.0,
    units_scale: float = 1.0,
) -> GeneratedFleet:
    """Generate the demo fleet's registry and exports into ``out_dir``.

    Parameters
    ----------
    out_dir : Path
        Folder to write into (created if missing). Earlier generated CSVs in its
        ``histograms/`` and ``readings/`` subfolders are replaced; nothing else is touched.
    seed : int
        Random seed; the same arguments always give byte-identical files.
    end_date : datetime.date, optional
        Last day of data (default: today, UTC). The demo's as-of date is the day after.
    years : float
        Length of the history [years], 0.05-10. The stories need about 3 years.
    units_scale : float
        Share of the fleet to generate [-], 0-1; story units are always kept.

    Returns
    -------
    GeneratedFleet
    """
    end = _check_arguments(seed, end_date, years, units_scale)
    n_days = int(round(years * 365.25))
    last = np.datetime64(end.isoformat(), "D")
    days = np.arange(last - n_days + 1, last + 1)
    roster = select_roster(units_scale)
    histories, meter0 = _simulate(roster, seed, days)
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=".generating-", dir=out_dir))
    try:
        exports, count = _write_all(histories, meter0, days, seed, tmp)
        extra = [tmp / "registry.yaml", tmp / BROKEN_NAME]
        moved = _move_into(tmp, out_dir, exports + extra)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    stories: dict[str, object] = {role: tag for role, tag in STORIES.items()}
    stories["rebuilt_recently"] = (STORIES["rebuilt_recently"], REBUILT_RECENTLY_POSITION)
    return GeneratedFleet(
        registry_path=moved[-2],
        export_paths=moved[:-2],
        broken_path=moved[-1],
        stories=stories,
        start_date=date.fromisoformat(str(days[0])),
        end_date=end,
        as_of=end + timedelta(days=1),
        units=len(roster),
        histograms=count,
        sizes_bytes={str(p.relative_to(out_dir)): p.stat().st_size for p in moved},
    )


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="python -m demo_fleet.generate",
        description="Write the invented drivespan demo fleet (registry and exports).",
        epilog="example: python -m demo_fleet.generate /tmp/demo --seed 7 --years 3",
    )
    parser.add_argument("out_dir", type=Path, help="folder to write into")
    parser.add_argument("--seed", type=int, default=7, help="random seed (default 7)")
    parser.add_argument("--years", type=float, default=3.0, help="years of history (default 3)")
    parser.add_argument(
        "--end-date",
        type=date.fromisoformat,
        default=None,
        help="last day of data, YYYY-MM-DD (default today)",
    )
    parser.add_argument(
        "--scale",
        type=float,
        default=1.0,
        help="share of the fleet, 0-1; story units always kept (default 1)",
    )
    return parser


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: generate the demo fleet and print a short summary."""
    args = _parser().parse_args(argv)
    began = time.perf_counter()
    try:
        fleet = generate(
            args.out_dir,
            seed=args.seed,
            end_date=args.end_date,
            years=args.years,
            units_scale=args.scale,
        )
    except (ValueError, OSError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    total = sum(fleet.sizes_bytes.values())
    print(
        f"{fleet.units} units, {fleet.histograms} histograms, {len(fleet.export_paths)} "
        f"exports, {total / 1e6:.1f} MB in {time.perf_counter() - began:.1f} s -> {args.out_dir}"
    )
    print(f"data {fleet.start_date} .. {fleet.end_date}; as-of {fleet.as_of}")
    for role, tag in fleet.stories.items():
        print(f"  {role}: {tag}")
    print(f"  broken export (must be rejected): {fleet.broken_path}")
    print("  the numbers are estimates from an invented fleet, not advice on real machines")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
