"""Whole-process times of ``drivespan`` commands against a bare interpreter (run by hand).

    python tests/benchmarks/bench_startup.py [--rounds 15] [--demo-db sqlite:///PATH]
        [--before DIR --before-db sqlite:///PATH] [--pyc]

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

With ``--demo-db`` it also times ``python -c "import numpy, pandas, sqlalchemy"``: the
libraries every status command needs, the floor under ``rank``. ``--before DIR`` (another
checkout, e.g. ``git archive`` of an older commit) adds ``rank`` and ``unit`` run from that
code, alternating with this one, on ``--before-db`` (a store that code built; default the
same store). ``--pyc`` lets the processes keep compiled bytecode (in a private cache
folder, filled by the warm-up run) as an installed package does; without it a
``PYTHONDONTWRITEBYTECODE`` set in the environment makes every process compile the
package's own modules again (about 0.05 s).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
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
    p.add_argument("--before", type=Path, help="another checkout to time rank and unit from")
    p.add_argument("--before-db", help="the store for --before (default: --demo-db)")
    p.add_argument("--pyc", action="store_true", help="keep compiled bytecode between runs")
    args = p.parse_args()
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(x for x in (str(ROOT), env.get("PYTHONPATH")) if x)
    env.pop("DRIVESPAN_DB", None)
    if args.pyc:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = tempfile.mkdtemp(prefix="bench-pyc-")
    ds = drivespan()
    cases = {
        "python -c pass": ([sys.executable, "-c", "pass"], env),
        "drivespan --help": ([*ds, "--help"], env),
        "drivespan --version": ([*ds, "--version"], env),
    }
    if args.demo_db:
        floor = "import numpy, pandas, sqlalchemy"
        cases[f'python -c "{floor}"'] = ([sys.executable, "-c", floor], env)
        common = ["--db", args.demo_db, "--as-of", args.as_of, "--format", "json"]
        cases["drivespan rank (demo)"] = ([*ds, "rank", *common], env)
        cases["drivespan unit SW-14 (demo)"] = ([*ds, "unit", "SW-14", *common], env)
        if args.before:
            old = dict(env, PYTHONPATH=str(args.before.resolve()))
            old_common = [*common[:1], args.before_db or args.demo_db, *common[2:]]
            cases["rank (demo), --before code"] = ([*ds, "rank", *old_common], old)
            cases["unit SW-14 (demo), --before code"] = ([*ds, "unit", "SW-14", *old_common], old)
    for cmd, cenv in cases.values():  # warm the file cache (and the bytecode cache)
        run_once(cmd, cenv)
    runs: dict[str, list] = {name: [] for name in cases}
    load = [os.getloadavg()[0]]
    for _ in range(args.rounds):
        for name, (cmd, cenv) in cases.items():
            runs[name].append(run_once(cmd, cenv))
    load.append(os.getloadavg()[0])
    out = {"rounds": args.rounds, "load_avg_1min": load, "pyc": args.pyc, "commands": {}}
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
