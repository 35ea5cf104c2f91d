"""Benchmark of telemetry-JSON parsing (run by hand; pytest collects nothing here).

    python tests/benchmarks/bench_json.py                      # 40 000, 100 000, 400 000 bands
    python tests/benchmarks/bench_json.py --bands 40000 --bands 100000

For each size it writes a JSON site export of invented units (one document per unit
and day, one ten-band time-at-pressure histogram each, the shape a fleet telematics
export takes) to a temporary file and times ``monitor.ingest.parse.parse_file`` on its
bytes in a fresh child process, best of ``--repeat`` runs, with the child's peak
resident memory (reading the file included, making it not). The
time must grow in proportion to the size (the limit of a JSON file is 16 MiB).
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def site_json(n_bands: int, per_hist: int = 10) -> bytes:
    """A JSON site export of ``n_bands`` bands of invented units (seedless: deterministic)."""
    docs = []
    for k in range(n_bands // per_hist):
        day, pos = divmod(k, 2)
        start = f"2025-{1 + day // 28 % 12:02d}-{1 + day % 28:02d}T06:00:00Z"
        docs.append(
            {
                "unit": f"BX-{day // 336}",
                "period_start": start,
                "period_end": start.replace("T06", "T18"),
                "hour_meter_start": 1000 + day * 12.0,
                "hour_meter_end": 1000 + day * 12.0 + 10,
                "histograms": [
                    {
                        "position": ("left", "right")[pos],
                        "quantity": "pressure",
                        "pressure_unit": "bar",
                        "pressure_edges": [i * 40 for i in range(per_hist + 1)],
                        "hours": [1.0] * per_hist,
                        "mean_speed_rpm": 1800,
                    }
                ],
            }
        )
    return json.dumps(docs).encode()


def _child(path: str, n_bands: int, repeat: int) -> None:
    sys.path.insert(0, str(ROOT))
    from monitor.ingest.parse import parse_file

    data = Path(path).read_bytes()
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        parsed = parse_file(data, "site.json")
        best = min(best, time.perf_counter() - t0)
        assert parsed.ok, parsed.problems[:3]
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"bands": n_bands, "mib": len(data) / 2**20, "s": best, "peak_mb": peak_mb}))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--bands", type=int, action="append", help="bands per file (repeatable)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        _child(args.child[0], int(args.child[1]), args.repeat)
        return
    print(f"{'bands':>10} {'MiB':>7} {'best s':>8} {'bands/s':>10} {'peak MB':>8}")
    for n in args.bands or [40_000, 100_000, 400_000]:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "site.json"
            path.write_bytes(site_json(n))
            cmd = [sys.executable, __file__, "--child", str(path), str(n)]
            out = subprocess.run(
                [*cmd, "--repeat", str(args.repeat)],
                capture_output=True,
                text=True,
                check=True,
            )
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(
            f"{r['bands']:>10} {r['mib']:>7.1f} {r['s']:>8.2f} {r['bands'] / r['s']:>10.0f} "
            f"{r['peak_mb']:>8.0f}"
        )


if __name__ == "__main__":
    main()
