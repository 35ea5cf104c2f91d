"""Two invented pressure traces of a hired-in loader that logs no histograms.

TH-27 is an older wheel loader on hire at Tenterhook Hire Yard, without a histogram
logger. A technician clipped a handheld logger to both loops' gauge ports for four
minutes of loading from a stockpile, at 50 Hz:

- the **left** loop still has its original DS-P46 pump, which has no pressure cut-off
  (cross-port reliefs at 420 bar only): every push into the pile stalls the loop against
  the relief, and once the bucket hits rock the pressure spikes past 460 bar;
- the **right** loop got an exchange DS-P90 pump, whose cut-off is set at 400 bar, well
  below its 435 bar relief: in the same pushes it holds at the cut-off and never reaches
  the relief.

Both files have elapsed seconds (``time_s``) and a sidecar ``FILE.json`` with the unit,
position, hour meter and start, as a technician's logger export would. The unit is
appended to the generated registry (every other unit, and the committed sample, stay as
they were). Seeded: the same seed and end date give the same bytes.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd

TAG = "TH-27"
SITE = "Tenterhook Hire Yard"
HOUR_METER_START = 11842.6
RATE_HZ = 50.0
CYCLE_S = 24.0
CYCLES = 10  # four minutes
CHARGE_BAR = 25.0

REGISTRY_UNIT = f"""\
- tag: {TAG}
  site: {SITE}
  machine_type: wheel loader (hired in, no histogram logger)
  oil: hydro-46
  components:
  - position: left
    model: DS-P46
    serial: H-41907
  - position: right
    model: DS-P90
    serial: X-20233
  service: []
"""
"""The hired-in loader's registry entry (appended to the generated registry.yaml)."""

LOOPS = {
    # position: (file stem, pressure held in a push [bar], overshoot at its onset [bar])
    "left": ("TH-27_left_relief_stall", 421.0, 438.0),
    "right": ("TH-27_right_cutoff_hold", 400.0, 407.0),
}
ROCK_SPIKE_BAR = 468.0
"""Peak when the bucket hits rock in the sixth push (left loop only: over 10 % above its
420 bar relief; the right loop's cut-off destrokes its pump before that)."""


@dataclass(frozen=True)
class DemoTraces:
    """Trace files written, each with its sidecar's fields."""

    paths: tuple[Path, ...]
    fields: tuple[dict, ...]


def _loop(t: np.ndarray, hold_bar: float, onset_bar: float, rng, spike: bool):  # noqa: ANN001
    """High side, low side and speed of one loop over the work cycles (see module notes).

    Phases of a 24-s cycle: 0-6 s travel forward into the pile (A high, 110-140 bar),
    6-9 s the push builds up, 9-15 s stalled at the held pressure (speed 0), 15-18 s back
    off in reverse (B high, 160 bar), 18-24 s travel in reverse (B high, 100 bar).
    """
    c = t % CYCLE_S
    n = t.size
    travel = 125.0 + 15.0 * np.sin(2 * np.pi * t / 3.1)
    build = travel + (hold_bar - travel) * np.clip((c - 6.0) / 3.0, 0, 1) ** 1.5
    a = np.where(c < 6, travel, np.where(c < 9, build, np.where(c < 15, hold_bar, CHARGE_BAR)))
    onset = (c >= 9.0) & (c < 9.3)
    a = np.where(onset, onset_bar - (onset_bar - hold_bar) * (c - 9.0) / 0.3, a)
    if spike:
        hit = (t // CYCLE_S == 5) & (c >= 11.0) & (c < 11.12)
        a = np.where(hit, ROCK_SPIKE_BAR - 150.0 * (c - 11.0), a)
    b = np.where(c < 15, CHARGE_BAR, np.where(c < 18, 160.0, 100.0))
    a_high = c < 15
    a = a + rng.normal(0, 1.5, n) * a_high
    b = b + rng.normal(0, 1.5, n) * ~a_high
    low_noise = rng.normal(0, 0.4, n)
    a = np.where(a_high, a, CHARGE_BAR + low_noise)
    b = np.where(a_high, CHARGE_BAR + low_noise, b)
    speed = np.where(c < 6, 1650.0, np.where(c < 9, 1650.0 * (9.0 - c) / 3.0, 0.0))
    speed = np.where(c >= 15, np.where(c < 18, 1200.0, 1500.0), speed)
    speed = np.maximum(speed + rng.normal(0, 8.0, n) * (speed > 0), 0.0)
    return np.round(a, 2), np.round(b, 2), np.round(speed, 1)


def write_traces(out_dir: Path, registry_path: Path, end_date: date, seed: int = 7) -> DemoTraces:
    """Write the two traces and their sidecars into ``out_dir/traces`` and append TH-27
    to ``registry_path``; the traces start at 09:00 UTC on ``end_date``."""
    folder = Path(out_dir) / "traces"
    folder.mkdir(parents=True, exist_ok=True)
    with open(registry_path, "a", encoding="utf-8") as fh:
        fh.write(REGISTRY_UNIT)
    t = np.arange(int(CYCLES * CYCLE_S * RATE_HZ)) / RATE_HZ
    paths, fields = [], []
    for i, (position, (stem, hold, onset)) in enumerate(LOOPS.items()):
        rng = np.random.default_rng([seed, 50_000 + i])
        a, b, speed = _loop(t, hold, onset, rng, spike=position == "left")
        path = folder / f"{stem}.csv"
        frame = pd.DataFrame(
            {"time_s": np.round(t, 2), "pressure_a_bar": a, "pressure_b_bar": b, "speed_rpm": speed}
        )
        frame.to_csv(path, index=False, lineterminator="\n")
        side = {
            "unit": TAG,
            "position": position,
            "hour_meter_start": HOUR_METER_START,
            "started_at": f"{end_date.isoformat()}T09:00:00Z",
        }
        path.with_name(path.name + ".json").write_text(json.dumps(side, indent=2) + "\n")
        paths.append(path)
        fields.append(side)
    return DemoTraces(tuple(paths), tuple(fields))
