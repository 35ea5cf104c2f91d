"""Benchmarks of drivespan's heavy paths, run by hand (not collected by pytest).

    python tests/benchmarks/bench.py [--units N] [--years Y] [--ingest-units N] [--out FILE]

Stages, each in its own subprocess so its peak memory (max RSS) is its own:

- ``ingest``: a CSV of daily pressure histograms (8 bands each) for ``--ingest-units``
  units x 2 loops x 60 days is parsed and stored with its ledger rows through
  :func:`monitor.service.ingest_bytes` into a fresh store; reported as bands per second
  and as a ratio to a plain ``pandas.read_csv`` of the same bytes in the same process
  (best of ``--repeat`` rounds, the three calls alternating; wall and CPU time).
- ``build``: a store of ``--units`` units x 2 loops x ``--years`` years of daily uploads
  written directly with ``executemany`` in large batches (not through ingest), plus a
  monthly case-drain reading per loop.
- ``recompute``: :func:`monitor.service.recompute` over that store.
- ``rank``: :func:`monitor.service.fleet_status` + records over that store (best of
  ``--repeat``), with the best-of-3 split into the ledger read (and the registry join
  within it), the readings read, the pure status and the records; then once more with
  a rebuild and an inspection of every component added in a rolled-back transaction.
- ``dashboard``: the fleet page's render, if the dashboard offers
  ``tests/benchmarks/dashboard_hook.py.render_fleet_page(engine)``; skipped otherwise.

Targets (design brief): ingest >= 500 000 bands/s and <= 3x read_csv; recompute of
2 000 x 2 x 3 years (~4.4 M histograms) < 60 s; rank < 0.5 s; each < 1.5 GB.
The synthetic fleet is invented and seeded; its numbers mean nothing.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import platform
import resource
import sqlite3
import subprocess
import sys
import tempfile
import time
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

START = datetime(2023, 1, 1, tzinfo=UTC)
BANDS_LO = np.array([0, 50, 100, 150, 200, 250, 300, 350], float)
BANDS_HI = BANDS_LO + 50.0
N_BANDS = BANDS_LO.size
BATCH = 50_000


def registry_yaml(units: int) -> str:
    """An invented fleet: two pump models, one oil, four sites, ``units`` units."""
    lines = [
        "oils:",
        "  - {name: bench-oil-46, iso_vg: 46, viscosity_index: 100}",
        "component_models:",
        "  - {name: BQ-70, kind: pump, displacement_cm3: 70, rated_dp_bar: 400,"
        " rated_speed_rpm: 2400, rated_l10_h: 4500, low_side_bar: 25, relief_bar: 420,"
        " case_drain: {test_dp_bar: 250, test_temp_c: 50, new_lpm: 1.4, limit_factor: 2.0}}",
        "  - {name: BQ-45, kind: pump, displacement_cm3: 45, rated_dp_bar: 350,"
        " rated_speed_rpm: 2800, rated_l10_h: 5000, low_side_bar: 20, relief_bar: 380,"
        " cutoff_bar: 350, case_drain: {test_dp_bar: 200, test_temp_c: 50, new_lpm: 1.0,"
        " limit_lpm: 2.2}}",
        "sites:",
        *[f"  - name: Bench Site {s}" for s in range(4)],
        "units:",
    ]
    for u in range(units):
        model = "BQ-70" if u % 3 else "BQ-45"
        lines += [
            f"  - tag: BU-{u:05d}",
            f"    site: Bench Site {u % 4}",
            "    machine_type: bench loader",
            "    oil: bench-oil-46",
            "    components:",
            f"      - {{position: left, model: {model}}}",
            f"      - {{position: right, model: {model}}}",
        ]
    return "\n".join(lines) + "\n"


def daily_hours(rng: np.random.Generator, n: int) -> np.ndarray:
    """(n, 8) hours per band: 6-14 h a day, heavier bands rarer."""
    weights = np.array([4, 6, 8, 6, 4, 2, 1, 0.3])
    share = rng.dirichlet(weights * 5, size=n)
    return np.round(share * rng.uniform(6, 14, size=(n, 1)), 3)


def ingest_csv(units: int, days: int, seed: int = 1) -> bytes:
    rng = np.random.default_rng(seed)
    rows = []
    for u in range(units):
        hm = 1000.0
        hours = daily_hours(rng, days)
        for d in range(days):
            t0 = (START + timedelta(days=d)).strftime("%Y-%m-%dT%H:%M:%SZ")
            t1 = (START + timedelta(days=d + 1)).strftime("%Y-%m-%dT%H:%M:%SZ")
            tot = round(float(hours[d].sum()), 3)
            for pos in ("left", "right"):
                for b in range(N_BANDS):
                    rows.append(
                        f"BU-{u:05d},{pos},{t0},{t1},{hm:.3f},{hm + tot:.3f},pressure,"
                        f"{BANDS_LO[b]:g},{BANDS_HI[b]:g},{hours[d, b]:g},2200"
                    )
            hm += tot
    head = (
        "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
        "pressure_low_bar,pressure_high_bar,hours,mean_speed_rpm"
    )
    return (head + "\n" + "\n".join(rows) + "\n").encode()


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _ingest_once(data: bytes, units: int) -> tuple[float, float, object]:
    """Wall and CPU time of one ``usecases.ingest_bytes`` into a fresh store, and its result."""
    from monitor import usecases

    with tempfile.TemporaryDirectory() as tmp:
        engine = usecases.init_db(f"sqlite:///{tmp}/parse.db")
        usecases.import_registry(engine, registry_yaml(units), "bench.yaml")
        t, c = time.perf_counter(), time.process_time()
        res = usecases.ingest_bytes(engine, data, "bench.csv")
        wall, cpu = time.perf_counter() - t, time.process_time() - c
        engine.dispose()
    return wall, cpu, res


def stage_ingest(args: argparse.Namespace) -> dict:
    """Best of ``--repeat`` rounds; read_csv, parse and ingest alternate within a round."""
    from monitor import usecases
    from monitor.ingest import parse

    data = ingest_csv(args.ingest_units, 60)
    bands = data.count(b"\n") - 1
    best = {"read_csv": [np.inf, np.inf], "parse": [np.inf, np.inf], "ingest": [np.inf, np.inf]}
    res = None
    for _ in range(args.repeat):
        t, c = time.perf_counter(), time.process_time()
        pd.read_csv(io.BytesIO(data))
        timed = {"read_csv": (time.perf_counter() - t, time.process_time() - c)}
        t, c = time.perf_counter(), time.process_time()
        parsed = parse.parse_file(data, "bench.csv")
        timed["parse"] = (time.perf_counter() - t, time.process_time() - c)
        assert not parsed.problems, parsed.problems[:3]
        wall, cpu, res = _ingest_once(data, args.ingest_units)
        timed["ingest"] = (wall, cpu)
        for k, (w, cp) in timed.items():
            best[k] = [min(best[k][0], w), min(best[k][1], cp)]
    assert res.status == usecases.ACCEPTED, [str(p) for p in res.problems[:3]]
    t_pandas, t_parse, t_ingest = (best[k][0] for k in ("read_csv", "parse", "ingest"))
    return {
        "bands": bands,
        "repeat": args.repeat,
        "read_csv_s": t_pandas,
        "parse_s": t_parse,
        "ingest_s": t_ingest,
        "store_side_s": t_ingest - t_parse,
        "cpu_s": {k: v[1] for k, v in best.items()},
        "parse_bands_per_s": bands / t_parse,
        "ingest_bands_per_s": bands / t_ingest,
        "parse_ratio_to_read_csv": t_parse / t_pandas,
        "ingest_ratio_to_read_csv": t_ingest / t_pandas,
        "peak_mb": _peak_mb(),
    }


def _ts(t: datetime) -> str:
    return t.strftime("%Y-%m-%d %H:%M:%S.000000")  # SQLAlchemy's SQLite DATETIME format


def stage_build(args: argparse.Namespace) -> dict:
    from monitor import usecases

    path = Path(args.db)
    path.unlink(missing_ok=True)
    t = time.perf_counter()
    engine = usecases.init_db(f"sqlite:///{path}")
    usecases.import_registry(engine, registry_yaml(args.units), "bench.yaml")
    with engine.connect() as conn:
        comps = conn.exec_driver_sql(
            "SELECT c.unit_id, c.id FROM component c ORDER BY c.unit_id, c.id"
        ).all()
    by_unit: dict[int, list[int]] = {}
    for u, c in comps:
        by_unit.setdefault(u, []).append(c)
    days = int(round(365 * args.years))
    n_hist = _build_uploads(engine, by_unit, days, np.random.default_rng(7))
    engine.dispose()
    con = sqlite3.connect(path)
    file_id = con.execute("SELECT min(id) FROM upload_file").fetchone()[0]
    n_read = _build_readings(con, by_unit, file_id, days, np.random.default_rng(8))
    con.commit()
    con.close()
    return {
        "histograms": n_hist,
        "readings": n_read,
        "build_s": time.perf_counter() - t,
        "db_mb": path.stat().st_size / 1e6,
        "peak_mb": _peak_mb(),
    }


MONTH_DAYS = 30
"""Days per upload file of the built store: its histograms are stored in one block per
file and component, as monthly exports would leave them."""


def _build_uploads(engine, by_unit: dict, days: int, rng) -> int:  # noqa: ANN001
    """Uploads and histogram blocks of every unit, one upload file per 30 days."""
    from monitor.domain.batch import HistogramBatch
    from monitor.store import blocks

    ns = (
        np.datetime64(START.replace(tzinfo=None), "ns")
        + np.arange(days + 1) * np.timedelta64(1, "D")
    ).astype(np.int64)
    stamps = [_ts(START + timedelta(days=d)) for d in range(days + 1)]
    hours = {
        u: daily_hours(rng, days * len(c)).reshape(days, len(c), N_BANDS)
        for u, c in by_unit.items()
    }
    meters = {u: np.r_[500.0, 500.0 + np.cumsum(h[:, 0].sum(axis=1))] for u, h in hours.items()}
    uid, n = 0, 0
    for m0 in range(0, days, MONTH_DAYS):
        month = range(m0, min(days, m0 + MONTH_DAYS))
        with engine.begin() as conn:
            raw = conn.connection.dbapi_connection
            raw.execute(
                "INSERT INTO upload_file (sha256, name, received_at, n_histograms, n_readings) "
                "VALUES (?, ?, ?, 0, 0)",
                (f"bench-{m0}", f"bench-{m0:04d}.csv", _ts(datetime.now(UTC))),
            )
            file_id = raw.execute("SELECT max(id) FROM upload_file").fetchone()[0]
            ups, comp, upl, day, hrs, meter0, meter1 = [], [], [], [], [], [], []
            for unit_id, cids in by_unit.items():
                for d in month:
                    uid += 1
                    mt = meters[unit_id]
                    ups.append((uid, file_id, unit_id, stamps[d], stamps[d + 1], mt[d], mt[d + 1]))
                    for j, cid in enumerate(cids):
                        comp.append(cid)
                        upl.append(uid)
                        day.append(d)
                        hrs.append(hours[unit_id][d, j])
                        meter0.append(mt[d])
                        meter1.append(mt[d + 1])
            raw.executemany(
                "INSERT INTO upload (id, file_id, unit_id, period_start, period_end, "
                "hour_meter_start, hour_meter_end) VALUES (?,?,?,?,?,?,?)",
                ups,
            )
            k, day = len(comp), np.array(day)
            batch = HistogramBatch(
                unit=np.full(k, "", object),
                position=np.full(k, "", object),
                quantity=np.full(k, "pressure", object),
                period_start_ns=ns[day],
                period_end_ns=ns[day + 1],
                hour_meter_start=np.array(meter0),
                hour_meter_end=np.array(meter1),
                mean_speed_rpm=np.full(k, 2200.0),
                line=None,
                n_pressure=np.full(k, N_BANDS, dtype=np.int64),
                n_speed=np.zeros(k, dtype=np.int64),
                pressure_low_bar=np.tile(BANDS_LO, k),
                pressure_high_bar=np.tile(BANDS_HI, k),
                speed_low_rpm=np.zeros(0),
                speed_high_rpm=np.zeros(0),
                hours=np.concatenate(hrs),
            )
            blocks.insert_blocks(conn, file_id, batch, np.array(comp), np.array(upl))
            n += k
    return n


def _build_readings(con, by_unit: dict, file_id: int, days: int, rng) -> int:  # noqa: ANN001
    rows = []
    for cids in by_unit.values():
        for cid in cids:
            for m, d in enumerate(range(15, days, 30)):
                q = 1.2 + 0.01 * m + rng.normal(0, 0.03)
                rows.append(
                    (
                        file_id,
                        cid,
                        _ts(START + timedelta(days=d, hours=10)),
                        500.0 + 10.0 * d,
                        q,
                        250.0,
                        50.0,
                        "18/16/13" if m % 6 == 0 else None,
                    )
                )
    con.executemany(
        "INSERT INTO reading (file_id, component_id, taken_at, hour_meter, "
        "case_drain_lpm, test_pressure_bar, oil_temp_c, iso4406) "
        "VALUES (?,?,?,?,?,?,?,?)",
        rows,
    )
    return len(rows)


def stage_recompute(args: argparse.Namespace) -> dict:
    from monitor import usecases
    from monitor.store import db

    engine = db.make_engine(f"sqlite:///{args.db}")
    load = os.getloadavg()[0]
    t, c = time.perf_counter(), time.process_time()
    n = usecases.recompute(engine)
    dt, cpu = time.perf_counter() - t, time.process_time() - c
    engine.dispose()
    return {
        "ledger_rows": n,
        "recompute_s": dt,
        "cpu_s": cpu,
        "histograms_per_s": n / dt,
        "load_avg_1min": [load, os.getloadavg()[0]],
        "peak_mb": _peak_mb(),
    }


def _as_of(args: argparse.Namespace) -> date:
    return (START + timedelta(days=int(round(365 * args.years)) + 1)).date()


def stage_rank(args: argparse.Namespace) -> dict:
    from monitor import usecases
    from monitor.store import db

    engine = db.make_engine(f"sqlite:///{args.db}")
    times, cpus = [], []
    load = os.getloadavg()[0]
    for _ in range(args.repeat):
        t, c = time.perf_counter(), time.process_time()
        df = usecases.fleet_status(engine, _as_of(args))
        recs = usecases.rank_records(df)
        times.append(time.perf_counter() - t)
        cpus.append(time.process_time() - c)
    split = _rank_split(engine, _as_of(args))
    events = _rank_with_rebuilds(engine, _as_of(args))
    engine.dispose()
    with_wear = int(df["remaining_wear_h"].notna().sum())
    return {
        "components": len(recs),
        "with_wear_estimate": with_wear,
        "rank_s": min(times),
        "rank_s_median": float(np.median(times)),
        "rank_cpu_s_median": float(np.median(cpus)),
        "rank_s_all": times,
        "rank_cpu_s_all": cpus,
        "load_avg_1min": [load, os.getloadavg()[0]],
        "split_s": split,
        "with_rebuild_events": events,
        "peak_mb": _peak_mb(),
    }


def _rank_split(engine, as_of: date) -> dict:  # noqa: ANN001
    """Best-of-3 time of each part of a rank: the two store reads and the pure status.

    ``ledger_points`` is the whole ledger read (``status_reads.status_inputs``), of which
    ``components`` (the registry join, ``queries.components_frame``) is timed apart."""
    from monitor import fleet
    from monitor.store import queries, status_reads
    from monitor.usecases.settings import _params_for

    params = _params_for(engine, None, None)
    t0 = fleet.as_of_instant(as_of)
    best = {
        "ledger_points": np.inf,
        "components": np.inf,
        "readings": np.inf,
        "status": np.inf,
        "records": np.inf,
    }
    for _ in range(3):
        with engine.connect() as conn:
            t = time.perf_counter()
            queries.components_frame(conn)
            best["components"] = min(best["components"], time.perf_counter() - t)
            t = time.perf_counter()
            inputs = status_reads.status_inputs(
                conn,
                t0,
                rate_window_h=params.rate_window_h,
                utilisation_days=params.utilisation_days,
            )
            best["ledger_points"] = min(best["ledger_points"], time.perf_counter() - t)
            t = time.perf_counter()
            readings = status_reads.readings_in_life(conn, t0)
            best["readings"] = min(best["readings"], time.perf_counter() - t)
        t = time.perf_counter()
        df = fleet.fleet_status(inputs, readings, as_of, params)
        best["status"] = min(best["status"], time.perf_counter() - t)
        t = time.perf_counter()
        fleet.rank_records(df)
        best["records"] = min(best["records"], time.perf_counter() - t)
    return best


def _rank_with_rebuilds(engine, as_of: date) -> dict:  # noqa: ANN001
    """A rank over the store with a rebuild and an inspection of every component added
    (200 and 100 days before ``as_of``) inside a transaction that is rolled back: the
    store itself has no service events. Best of 3 of the two reads and the status."""
    from sqlalchemy import text

    from monitor import fleet
    from monitor.store import status_reads
    from monitor.usecases.settings import _params_for

    params = _params_for(engine, None, None)
    t0 = fleet.as_of_instant(as_of)
    best, n_events, df = np.inf, 0, None
    with engine.connect() as conn:
        comps = conn.execute(text("SELECT id, unit_id FROM component")).all()
        rows = [
            {"u": u, "c": c, "k": kind, "at": _ts(t0 - timedelta(days=days)), "h": 0.0}
            for c, u in comps
            for kind, days in (("rebuild", 200), ("inspection", 100))
        ]
        conn.execute(
            text(
                "INSERT INTO service_event (unit_id, component_id, kind, at, hour_meter) "
                "VALUES (:u, :c, :k, :at, :h)"
            ),
            rows,
        )
        n_events = len(rows)
        for _ in range(3):
            t = time.perf_counter()
            inputs = status_reads.status_inputs(
                conn,
                t0,
                rate_window_h=params.rate_window_h,
                utilisation_days=params.utilisation_days,
            )
            readings = status_reads.readings_in_life(conn, t0)
            df = fleet.fleet_status(inputs, readings, as_of, params)
            fleet.rank_records(df)
            best = min(best, time.perf_counter() - t)
        conn.rollback()
    return {
        "service_events": n_events,
        "rank_s": best,
        "with_wear_estimate": int(df["remaining_wear_h"].notna().sum()),
    }


def stage_dashboard(args: argparse.Namespace) -> dict:
    """Hook for the dashboard's fleet page (added by the dashboard code when it exists)."""
    from monitor.store import db

    try:
        from dashboard_hook import render_fleet_page  # type: ignore[import-not-found]
    except ImportError:
        return {"skipped": "tests/benchmarks/dashboard_hook.py.render_fleet_page not available"}
    engine = db.make_engine(f"sqlite:///{args.db}")
    t = time.perf_counter()
    timings = render_fleet_page(engine)
    return {"render_s": time.perf_counter() - t, **timings, "peak_mb": _peak_mb()}


STAGES = {
    "ingest": stage_ingest,
    "build": stage_build,
    "recompute": stage_recompute,
    "rank": stage_rank,
    "dashboard": stage_dashboard,
}


def run_stage(name: str, args: argparse.Namespace) -> dict:
    cmd = [
        sys.executable,
        __file__,
        "--stage",
        name,
        "--units",
        str(args.units),
        "--years",
        str(args.years),
        "--ingest-units",
        str(args.ingest_units),
        "--repeat",
        str(args.repeat),
        "--db",
        args.db,
    ]
    t = time.perf_counter()
    out = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if out.returncode != 0:
        return {"error": out.stderr.strip().splitlines()[-1] if out.stderr else "failed"}
    res = json.loads(out.stdout.strip().splitlines()[-1])
    res["wall_s"] = time.perf_counter() - t
    return res


def machine() -> dict:

    mem = None
    try:
        with open("/proc/meminfo") as f:  # noqa: PTH123
            mem = f.readline().split()[1]
    except OSError:
        pass
    cpu = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo") as f:  # noqa: PTH123
            cpu = next(ln.split(":", 1)[1].strip() for ln in f if ln.startswith("model name"))
    except (OSError, StopIteration):
        pass
    return {
        "cpu": cpu,
        "cores": os.cpu_count(),
        "mem_gb": round(int(mem) / 2**20, 1) if mem else None,
        "python": platform.python_version(),
        "sqlite": sqlite3.sqlite_version,
        "pandas": pd.__version__,
        "numpy": np.__version__,
        "os": platform.platform(),
    }


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--units", type=int, default=2000)
    p.add_argument("--years", type=float, default=3.0)
    p.add_argument("--ingest-units", type=int, default=200)
    p.add_argument("--repeat", type=int, default=3, help="rounds of ingest and rank, best kept")
    p.add_argument("--db", default=str(Path(tempfile.gettempdir()) / "drivespan-bench.db"))
    p.add_argument("--out", help="write the results as JSON here")
    p.add_argument("--stage", choices=sorted(STAGES), help=argparse.SUPPRESS)
    p.add_argument("--only", nargs="*", choices=sorted(STAGES), help="run only these stages")
    args = p.parse_args()
    if args.stage:
        print(json.dumps(STAGES[args.stage](args)))
        return
    results = {
        "machine": machine(),
        "units": args.units,
        "years": args.years,
        "ingest_units": args.ingest_units,
        "when": datetime.now(UTC).isoformat(),
    }
    for name in args.only or ["ingest", "build", "recompute", "rank", "dashboard"]:
        print(f"running {name} ...", file=sys.stderr, flush=True)
        results[name] = run_stage(name, args)
        print(f"  {json.dumps(results[name])}", file=sys.stderr, flush=True)
    text = json.dumps(results, indent=2)
    print(text)
    if args.out:
        Path(args.out).write_text(text + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
