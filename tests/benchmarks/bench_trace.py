"""Benchmark of reading a long pressure trace (run by hand; pytest collects nothing here).

    python tests/benchmarks/bench_trace.py                    # one hour at 1 kHz
    python tests/benchmarks/bench_trace.py --rows 360000      # a quicker look
    python tests/benchmarks/bench_trace.py --hysteresis-bar 0 # every reversal kept
    python tests/benchmarks/bench_trace.py --timestamps       # ISO 8601 time column

Generates a seeded, invented trace of a loader's drive loop (both loop pressures with
sensor noise, direction changes, digging cycles, stalls against the relief, short spikes,
and the shaft speed) as a CSV in a temporary folder, then reads it with
``monitor.ingest.trace.read_trace`` in a fresh child process, so that the peak resident
memory (``resource.getrusage(...).ru_maxrss``) is that of reading alone. Reports the
child's wall and CPU time of ``read_trace``, its peak RSS and its RSS right after the
imports, and separately the time of the rainflow count of the turning points.

Targets (issue 14): one hour at 1 kHz (3.6 M rows, two pressures and speed) read in under
10 s and under 600 MB peak on the project's 2-core machine.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
RELIEF_BAR = 450.0
CYCLE_S = 12.0
"""One invented work cycle: travel, dig, (every third cycle) stall, return."""


def _template(rng, n_cycles: int):
    """Knot times [s], and high-side pressure [bar] and speed [rpm] at the knots of every
    cycle (4 s travel, 3 s dig, 1 s hold, 4 s return)."""
    import numpy as np

    knots_s = np.array([0.0, 4.0, 6.5, 7.0, 8.0, 8.2, 12.0])
    dig = rng.uniform(280.0, 400.0, n_cycles)
    stall = (np.arange(n_cycles) % 3) == 2
    hold = np.where(stall, RELIEF_BAR + 2.0, dig)
    p = np.column_stack(
        [
            np.full(n_cycles, 120.0),
            np.full(n_cycles, 140.0),
            dig,
            hold,
            hold,
            np.full(n_cycles, 90.0),
            np.full(n_cycles, 110.0),
        ]
    )
    speed = np.column_stack(
        [
            np.full(n_cycles, 2100.0),
            np.full(n_cycles, 2100.0),
            np.full(n_cycles, 900.0),
            np.where(stall, 0.0, 400.0),
            np.where(stall, 0.0, 400.0),
            np.full(n_cycles, 1800.0),
            np.full(n_cycles, 2100.0),
        ]
    )
    t = (np.arange(n_cycles)[:, None] * CYCLE_S + knots_s[None, :]).ravel()
    return t, np.stack([p.ravel(), speed.ravel()])


def make_trace(
    path: Path, rows: int, rate_hz: float, timestamps: bool = False, seed: int = 14
) -> None:
    """Write the invented trace CSV (time_s or timestamp, pressure_a_bar, pressure_b_bar,
    speed_rpm)."""
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(seed)
    t = np.arange(rows) / rate_hz
    n_cycles = int(np.ceil(t[-1] / CYCLE_S)) + 1
    kt, (kp, ks) = _template(rng, n_cycles)
    high = np.interp(t, kt, kp) + rng.normal(0.0, 1.5, rows)
    spikes = rng.choice(rows, size=max(1, rows // 200_000), replace=False)
    for i in spikes:  # a few 20 ms pressure spikes over the relief
        high[i : i + 20] += np.linspace(0.0, 80.0, high[i : i + 20].size)
    low = 25.0 + rng.normal(0.0, 0.5, rows)
    forward = (np.floor(t / 30.0) % 2) == 0  # travel direction changes every 30 s
    a = np.where(forward, high, low).clip(0.0, 1000.0).round(1)
    b = np.where(forward, low, high).clip(0.0, 1000.0).round(1)
    speed = (np.interp(t, kt, ks) + rng.normal(0.0, 3.0, rows)).clip(0.0).round(0)
    time_col = {"time_s": t.round(3)}
    if timestamps:
        ms = np.datetime64("2026-03-02T06:00:00", "ms") + np.round(t * 1000).astype(
            "timedelta64[ms]"
        )
        time_col = {"timestamp": np.char.add(np.datetime_as_string(ms, unit="ms"), "Z")}
    frame = pd.DataFrame({**time_col, "pressure_a_bar": a, "pressure_b_bar": b, "speed_rpm": speed})
    try:
        import pyarrow as pa
        import pyarrow.csv as pacsv

        pacsv.write_csv(pa.Table.from_pandas(frame, preserve_index=False), str(path))
    except ImportError:
        frame.to_csv(path, index=False)


def _rss_mb() -> tuple[float, float | None]:
    """Peak resident set size of this process [MB]: ``ru_maxrss`` (Linux reports KiB; it
    can carry the parent's peak over ``fork``, which is why the parent stays small) and
    ``VmHWM`` of /proc/self/status (this program's own peak) where the system has it."""
    maxrss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    try:
        status = Path("/proc/self/status").read_text()
    except OSError:
        return maxrss, None
    hwm = [ln.split()[1] for ln in status.splitlines() if ln.startswith("VmHWM:")]
    return maxrss, (int(hwm[0]) / 1024.0 if hwm else None)


def read_once(path: Path, chunk_rows: int, hysteresis_bar: float) -> dict:
    """Read the trace in this process; wall and CPU time, peak RSS, result sizes."""
    sys.path.insert(0, str(ROOT))
    from monitor.ingest.trace import TraceSettings, read_trace
    from monitor.models.cycles import summarise_cycles

    settings = TraceSettings(
        relief_bar=RELIEF_BAR, chunk_rows=chunk_rows, hysteresis_bar=hysteresis_bar
    )
    rss_imports = _rss_mb()
    w0, c0 = time.perf_counter(), time.process_time()
    with open(path, "rb") as fh:
        result = read_trace(fh, path.name, settings)
    wall, cpu = time.perf_counter() - w0, time.process_time() - c0
    rss_read, hwm_read = _rss_mb()
    assert result.ok, result.problems[:5]
    w1 = time.perf_counter()
    cycles = summarise_cycles(result.turning_points_bar, operating_hours=result.operating_hours)
    cycles_s = time.perf_counter() - w1
    return {
        "read_wall_s": round(wall, 2),
        "read_cpu_s": round(cpu, 2),
        "peak_rss_mb": round(rss_read, 1),
        "peak_vmhwm_mb": None if hwm_read is None else round(hwm_read, 1),
        "rss_after_imports_mb": round(rss_imports[0], 1),
        "rainflow_s": round(cycles_s, 2),
        "samples": result.samples,
        "hours": round(float(result.hours.sum()), 4),
        "turning_points": int(result.turning_points_bar.size),
        "cycles": cycles.total_cycles,
        "relief_excursions": len(result.relief_excursions),
        "stalled_at_relief_s": round(result.stalls.stalled_at_relief_s, 1),
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rows", type=int, default=3_600_000)
    ap.add_argument("--rate-hz", type=float, default=1000.0)
    ap.add_argument("--chunk-rows", type=int, default=200_000)
    ap.add_argument("--hysteresis-bar", type=float, default=5.0, help="turning-point gate")
    ap.add_argument("--timestamps", action="store_true", help="ISO 8601 times, not time_s")
    ap.add_argument("--read", type=Path, help=argparse.SUPPRESS)  # child: read
    ap.add_argument("--make", type=Path, help=argparse.SUPPRESS)  # child: generate
    args = ap.parse_args()
    if args.read:
        print(json.dumps(read_once(args.read, args.chunk_rows, args.hysteresis_bar)))
        return
    if args.make:
        make_trace(args.make, args.rows, args.rate_hz, args.timestamps)
        return
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "trace_1khz.csv"
        t0 = time.perf_counter()
        make = ["--make", str(path), "--rows", str(args.rows), "--rate-hz", str(args.rate_hz)]
        make += ["--timestamps"] if args.timestamps else []
        subprocess.run([sys.executable, __file__, *make], check=True)
        size_mb = os.path.getsize(path) / 1e6
        print(f"generated {args.rows} rows ({size_mb:.0f} MB) in {time.perf_counter() - t0:.1f} s")
        read = ["--read", str(path), "--chunk-rows", str(args.chunk_rows)]
        read += ["--hysteresis-bar", str(args.hysteresis_bar)]
        child = [sys.executable, __file__, *read]
        out = subprocess.run(child, capture_output=True, text=True, check=True)
    report = json.loads(out.stdout)
    print(f"turning-point gate {args.hysteresis_bar:g} bar, {args.chunk_rows} rows per chunk")
    print(f"{platform.python_implementation()} {platform.python_version()}, {os.cpu_count()} CPUs")
    for k, v in report.items():
        print(f"  {k:22s} {v}")
    ok = report["read_wall_s"] < 10 and report["peak_rss_mb"] < 600
    print("targets (< 10 s, < 600 MB):", "met" if ok else "NOT met")


if __name__ == "__main__":
    main()
