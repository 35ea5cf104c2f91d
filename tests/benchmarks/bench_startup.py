"""Whole-process times of ``drivespan`` commands against a bare interpreter (run by hand).

    python tests/benchmarks/bench_startup.py [--rounds 15] [--demo-db sqlite:///PATH]

Rounds alternate the commands: ``python -c pass``, ``drivespan --help``, ``drivespan
--version`` and, given ``--demo-db``, ``drivespan rank --format json`` and ``drivespan
unit SW-14 --format json`` on that store at 2026-12-02 (build one with
``drivespan demo --no-dashboard`` or take the test suite's full demo). For each command
it prints the median and the lowest wall time, the median CPU time (user + system of
that process, from ``os.wait4``) and the peak resident memory. On a machine shared with
other jobs the wall times swing with the load; the CPU times are the steadier figure.

The ``drivespan`` console script next to this interpreter is used with this checkout
first on ``PYTHONPATH`` (so the checkout's code runs); without one, ``python -m
monitor.cli``. Targets (issue 16): ``--help`` and ``--version`` within 0.15 s, ``rank`` on
the demo fleet within 0.6 s.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def drivespan() -> list[str]:
    script = Path(sys.executable).with_name("drivespan")
    return [str(script)] if script.exists() else [sys.executable, "-m", "monitor.cli"]


def run_once(cmd: list[str], env: dict) -> tuple[float, float, float]:
    """(wall [s], CPU [s], peak RSS [MB]) of one run of ``cmd``."""
    t = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd)} exited with {proc.returncode}")
    return wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--rounds", type=int, default=15)
    p.add_argument("--demo-db", help="a demo store's URL for rank and unit")
    p.add_argument("--as-of", default="2026-12-02")
    args = p.parse_args()
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(x for x in (str(ROOT), env.get("PYTHONPATH")) if x)
    env.pop("DRIVESPAN_DB", None)
    ds = drivespan()
    cases = {
        "python -c pass": [sys.executable, "-c", "pass"],
        "drivespan --help": [*ds, "--help"],
        "drivespan --version": [*ds, "--version"],
    }
    if args.demo_db:
        common = ["--db", args.demo_db, "--as-of", args.as_of, "--format", "json"]
        cases["drivespan rank (demo)"] = [*ds, "rank", *common]
        cases["drivespan unit SW-14 (demo)"] = [*ds, "unit", "SW-14", *common]
    for cmd in cases.values():  # warm the file cache
        run_once(cmd, env)
    runs: dict[str, list] = {name: [] for name in cases}
    load = [os.getloadavg()[0]]
    for _ in range(args.rounds):
        for name, cmd in cases.items():
            runs[name].append(run_once(cmd, env))
    load.append(os.getloadavg()[0])
    out = {"rounds": args.rounds, "load_avg_1min": load, "commands": {}}
    for name, rs in runs.items():
        walls, cpus, rss = zip(*rs, strict=True)
        out["commands"][name] = {
            "wall_median_s": round(statistics.median(walls), 3),
            "wall_min_s": round(min(walls), 3),
            "cpu_median_s": round(statistics.median(cpus), 3),
            "peak_mb": round(max(rss), 1),
        }
    print(json.dumps(out, indent=2))


if __name__ == "__main__":
    main()
