"""Whole-process ingest against plain references (run by hand; pytest collects nothing).

    python tests/benchmarks/bench_process.py [--units 200] [--days 120] [--rounds 5]

Issue 16, item 2. For 12-band and for 8-band daily time-at-pressure histograms of
``--units`` invented units (two drive loops each) over ``--days`` days (the defaults give
48 000 histograms, 576 000 bands of 12), it writes the export CSV and a fleet registry,
builds a template SQLite store that holds only the registry (``drivespan init`` and
``drivespan fleet import``, outside the timing), then alternates, round by round, three
whole processes:

- ``read_csv``: a bare interpreter that imports pandas and reads the file;
- ``diy``: a do-it-yourself script: ``read_csv``, ``DataFrame.to_sql`` one row per band
  into a fresh SQLite file, one SQL aggregate for the Palmgren-Miner sum per loop;
- ``drivespan ingest`` of the file into a fresh copy of the template store.

With ``--before DIR`` (a checkout of an earlier commit, e.g. made by ``git worktree add``)
each round also runs that checkout's ``drivespan ingest`` into its own template store, so
before and after are measured under the same load.

Per case it prints the median and lowest wall time, the median CPU time (user + system,
``os.wait4``) and peak resident memory, and the ratios of the medians. Targets: ingest
at most 3x ``read_csv`` and at least 2.5x faster than ``diy``.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.benchmarks.bench_startup import drivespan, run_once  # noqa: E402

HEADER = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,hours,mean_speed_rpm"
)

READ_CSV = "import sys, pandas as pd; pd.read_csv(sys.argv[1])"

DIY = """
import sqlite3, sys
import pandas as pd
frame = pd.read_csv(sys.argv[1])
con = sqlite3.connect(sys.argv[2])
frame.to_sql("band", con, index=False, chunksize=50_000)
con.execute("CREATE INDEX ix_band ON band (unit, position)")
rows = con.execute(
    "SELECT unit, position, SUM(hours / (4500.0 * POWER(400.0 / "
    "MAX((pressure_low_bar + pressure_high_bar) / 2.0, 1.0), 10.0 / 3.0))) "
    "FROM band GROUP BY unit, position"
).fetchall()
con.commit()
print(len(rows))
"""


def registry_yaml(units: int) -> str:
    """One invented site, oil and pump model; ``units`` units of two loops each."""
    lines = [
        "# Invented benchmark fleet: every name here is made up.",
        "oils:",
        "  - {name: bench-oil-46, iso_vg: 46, viscosity_index: 100}",
        "component_models:",
        "  - {name: PX-70, kind: pump, displacement_cm3: 70, rated_dp_bar: 400,",
        "      rated_speed_rpm: 2400, rated_l10_h: 4500, low_side_bar: 25, relief_bar: 440}",
        "sites:",
        "  - name: Brackenmoor Yard",
        "units:",
    ]
    for u in range(units):
        lines += [
            f"  - tag: PX-{u:04d}",
            "    site: Brackenmoor Yard",
            "    machine_type: bench loader",
            "    oil: bench-oil-46",
            "    components:",
            "      - {position: left, model: PX-70}",
            "      - {position: right, model: PX-70}",
        ]
    return "\n".join(lines) + "\n"


def export_csv(units: int, days: int, n_bands: int, seed: int = 16) -> bytes:
    """Daily ``n_bands``-band histograms of both loops of every unit, in unit order."""
    rng = np.random.default_rng(seed)
    width = 420.0 / n_bands
    lo = np.round(np.arange(n_bands) * width, 1)
    weights = np.linspace(6.0, 0.5, n_bands)
    share = rng.dirichlet(weights * 5, size=(units, days))  # (units, days, bands)
    per_day = rng.uniform(6.0, 14.0, size=(units, days, 1))
    hours = np.round(share * per_day, 3)
    total = hours.sum(axis=2)
    meter_end = 1000.0 + np.cumsum(total, axis=1)
    meter_start = meter_end - total
    day = np.datetime64("2026-01-01") + np.arange(days + 1).astype("timedelta64[D]")
    stamp = np.char.add(np.datetime_as_string(day, unit="s"), "Z")
    u, d, p, b = np.meshgrid(
        np.arange(units), np.arange(days), np.arange(2), np.arange(n_bands), indexing="ij"
    )
    u, d, p, b = u.ravel(), d.ravel(), p.ravel(), b.ravel()
    frame = pd.DataFrame(
        {
            "unit": np.char.add("PX-", np.char.zfill(u.astype(str), 4)),
            "position": np.array(["left", "right"])[p],
            "period_start": stamp[d],
            "period_end": stamp[d + 1],
            "hour_meter_start": np.round(meter_start[u, d], 3),
            "hour_meter_end": np.round(meter_start[u, d] + total[u, d], 3),
            "quantity": "pressure",
            "pressure_low_bar": lo[b],
            "pressure_high_bar": np.round(lo[b] + width, 1),
            "hours": hours[u, d, b],
            "mean_speed_rpm": 2200,
        }
    )
    text = frame.to_csv(index=False, lineterminator="\n", float_format="%.10g")
    assert text.split("\n", 1)[0] == HEADER
    return text.encode()


def _env(checkout: Path) -> dict:
    """The environment that runs ``checkout``'s code."""
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(x for x in (str(checkout), env.get("PYTHONPATH")) if x)
    env.pop("DRIVESPAN_DB", None)
    return env


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--units", type=int, default=200)
    ap.add_argument("--days", type=int, default=120)
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--bands", type=int, nargs="+", default=[12, 8])
    ap.add_argument("--before", type=Path, help="an earlier checkout to time alongside")
    args = ap.parse_args()
    env = _env(ROOT)
    env_before = _env(args.before) if args.before else None
    ds = drivespan()
    load = os.getloadavg()[0]
    print(f"machine: nproc={os.cpu_count()}, python {sys.version.split()[0]}, load {load:.2f}")
    with tempfile.TemporaryDirectory() as tmp:
        tmpd = Path(tmp)
        (tmpd / "fleet.yaml").write_text(registry_yaml(args.units))
        template = tmpd / "template.db"
        url = f"sqlite:///{template}"
        fleet = str(tmpd / "fleet.yaml")
        for cmd in (["init", "--db", url], ["fleet", "import", fleet, "--db", url]):
            subprocess.run([*ds, *cmd], check=True, env=env, capture_output=True)
        old_template = tmpd / "template-before.db"
        if env_before:
            url_b = f"sqlite:///{old_template}"
            for cmd in (["init", "--db", url_b], ["fleet", "import", fleet, "--db", url_b]):
                subprocess.run([*ds, *cmd], check=True, env=env_before, capture_output=True)
        (tmpd / "diy.py").write_text(DIY)
        for n_bands in args.bands:
            csv = tmpd / f"export-{n_bands}.csv"
            csv.write_bytes(export_csv(args.units, args.days, n_bands))
            n_rows = args.units * args.days * 2 * n_bands
            print(
                f"\n{n_bands}-band daily histograms: {csv.stat().st_size / 1e6:.1f} MB, "
                f"{n_rows:,} bands, {n_rows // n_bands:,} histograms, {args.units} units"
            )
            times: dict[str, list] = {"read_csv": [], "diy": [], "ingest": []}
            if env_before:
                times["before"] = []
            for r in range(args.rounds):
                store, diy_db = tmpd / f"run{r}.db", tmpd / f"diy{r}.db"
                old_store = tmpd / f"before{r}.db"
                shutil.copyfile(template, store)
                cases = {
                    "read_csv": ([sys.executable, "-c", READ_CSV, str(csv)], env),
                    "diy": ([sys.executable, str(tmpd / "diy.py"), str(csv), str(diy_db)], env),
                    "ingest": ([*ds, "ingest", str(csv), "--db", f"sqlite:///{store}"], env),
                }
                if env_before:
                    shutil.copyfile(old_template, old_store)
                    url_b = f"sqlite:///{old_store}"
                    cases["before"] = ([*ds, "ingest", str(csv), "--db", url_b], env_before)
                for name, (cmd, e) in cases.items():
                    times[name].append(run_once(cmd, e))
                for f in (store, diy_db, old_store):
                    f.unlink(missing_ok=True)
            med = {k: statistics.median(w for w, _, _ in v) for k, v in times.items()}
            for k, v in times.items():
                print(
                    f"  {k:9s} median {med[k]:.2f} s (lowest {min(w for w, _, _ in v):.2f} s), "
                    f"CPU {statistics.median(c for _, c, _ in v):.2f} s, "
                    f"peak {max(m for _, _, m in v):.0f} MB"
                )
            print(
                f"  ingest / read_csv {med['ingest'] / med['read_csv']:.2f}x (target <= 3x); "
                f"diy / ingest {med['diy'] / med['ingest']:.2f}x (target >= 2.5x)"
            )
            if env_before:
                print(
                    f"  before / ingest {med['before'] / med['ingest']:.2f}x; before / "
                    f"read_csv {med['before'] / med['read_csv']:.2f}x, diy / before "
                    f"{med['diy'] / med['before']:.2f}x"
                )


if __name__ == "__main__":
    main()
