"""Benchmark of a large histogram CSV read in parts (run by hand; pytest collects nothing).

    nice python tests/benchmarks/bench_stream.py                  # ~1 GB file
    nice python tests/benchmarks/bench_stream.py --bands 2000000  # ~0.2 GB, quicker

Writes a seeded histogram CSV of invented units (the shape of ``bench_ingest.make_csv``:
daily time-at-pressure histograms of two drive loops per unit, 10 % pressure-by-speed
matrices) to a temporary folder, a slice of histograms at a time, so the parent never
holds the whole file. Then a child process creates a fresh SQLite store, imports a
registry of the invented units and runs ``usecases.upload_path`` on the file (read in
parts above ``STREAM_THRESHOLD_BYTES``; ``--whole`` reads it whole with
``usecases.ingest_bytes`` for comparison). Reports the file size, the result, the wall
time of the ingest and the peak RSS of the child (``resource.getrusage``, which includes
the store set-up). Target: peak RSS under 1.5 GB for a 1 GB file.
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

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.benchmarks.bench_ingest import (  # noqa: E402
    _plan,
    _rows,
    _text,
    machine_line,
    make_registry,
)

SLICE_HISTOGRAMS = 40_000  # histograms generated and written at a time (even: loop pairs)


def write_csv(path: Path, n_bands: int, seed: int = 20260302) -> list[str]:
    """Write a seeded histogram CSV of about ``n_bands`` rows; return its unit tags."""
    rng = np.random.default_rng(seed)
    plan = _plan(n_bands, 0.1, rng)
    tags: set[str] = set()
    with path.open("wb") as f:
        for a in range(0, len(plan), SLICE_HISTOGRAMS):
            rows = _rows(plan.iloc[a : a + SLICE_HISTOGRAMS].reset_index(drop=True), rng)
            data = _text(rows)
            f.write(data if a == 0 else data.split(b"\n", 1)[1])
            tags.update(rows["unit"].unique().tolist())
    return sorted(tags)


def child(path: str, db: str, tags_file: str, whole: bool) -> None:
    """Ingest ``path`` into a fresh store ``db``; print one JSON line with the result."""
    from monitor import usecases

    engine = usecases.init_db(f"sqlite:///{db}")
    tags = json.loads(Path(tags_file).read_text())
    usecases.import_registry(engine, make_registry(tags), "bench-fleet.yaml")
    t0 = time.perf_counter()
    if whole:
        result = usecases.ingest_bytes(engine, Path(path).read_bytes(), Path(path).name)
    else:
        result = usecases.upload_path(engine, path)
    wall = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2  # KiB -> GiB
    print(
        json.dumps(
            {
                "status": result.status,
                "histograms": result.histograms,
                "problems": [str(p) for p in result.problems[:3]],
                "wall_s": wall,
                "peak_self_gib": peak,
            }
        )
    )


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    ap.add_argument("--bands", type=int, default=10_000_000, help="rows of the CSV")
    ap.add_argument("--whole", action="store_true", help="read the file whole instead")
    ap.add_argument("--child", nargs=3, metavar=("CSV", "DB", "TAGS"), help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        child(*args.child, whole=args.whole)
        return
    print(machine_line())
    with tempfile.TemporaryDirectory() as tmp:
        csv_path, db, tags_file = Path(tmp) / "bench.csv", Path(tmp) / "bench.db", Path(tmp) / "t"
        t0 = time.perf_counter()
        tags = write_csv(csv_path, args.bands)
        tags_file.write_text(json.dumps(tags))
        size = csv_path.stat().st_size
        print(
            f"file: {size / 1e9:.2f} GB ({size / 2**30:.2f} GiB), {len(tags)} units, "
            f"written in {time.perf_counter() - t0:.0f} s"
        )
        cmd = [sys.executable, __file__, "--child", str(csv_path), str(db), str(tags_file)]
        if args.whole:
            cmd.append("--whole")
        t0 = time.perf_counter()
        out = subprocess.run(cmd, check=True, capture_output=True, text=True)
        total = time.perf_counter() - t0
        peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024**2
        res = json.loads(out.stdout.strip().splitlines()[-1])
        print(f"result: {res['status']}, {res['histograms']} histograms {res['problems']}")
        print(
            f"{'whole' if args.whole else 'in parts'}: ingest {res['wall_s']:.0f} s "
            f"(child process {total:.0f} s with store set-up), peak RSS of the child "
            f"{peak:.2f} GiB ({peak * 1.073741824:.2f} GB); target < 1.5 GB"
        )
        print(f"store file: {db.stat().st_size / 1e9:.2f} GB")


if __name__ == "__main__":
    main()
