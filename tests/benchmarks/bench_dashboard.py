"""Benchmark of the dashboard's fleet page, run by hand (not collected by pytest).

    python tests/benchmarks/bench.py --only build recompute --units 2000 --db /tmp/bench.db
    python tests/benchmarks/bench_dashboard.py --db sqlite:////tmp/bench.db [--as-of 2023-07-03]

Runs the fleet page in Streamlit's AppTest on the given store: once cold (engine
opened, fleet ranked, frame cached) and then ``--repeats`` times warm, and prints the
numbers as JSON. Target (task brief): a 2 000-unit fleet's page in under 2 s after
the first load.
"""

from __future__ import annotations

import argparse
import json
import resource
import sys
from datetime import date
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from dashboard_hook import time_fleet_page  # noqa: E402

TARGET_S = 2.0


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--db", required=True, help="database URL of a filled store")
    p.add_argument("--as-of", type=date.fromisoformat, help="as-of date (default today)")
    p.add_argument("--repeats", type=int, default=3)
    args = p.parse_args()
    res = time_fleet_page(args.db, args.as_of, repeats=args.repeats)
    res["target_s"] = TARGET_S
    res["meets_target"] = res["cached_s"] < TARGET_S
    res["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps(res, indent=2))


if __name__ == "__main__":
    main()
