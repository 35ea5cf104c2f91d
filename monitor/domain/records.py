"""Plain record types of telemetry: problems, histograms and readings.

Everything here is in the canonical internal units: pressure [bar], speed [rpm],
time [h], flow [L/min], temperature [degC], viscosity [mm2/s]. Timestamps are
timezone-aware UTC ``datetime`` objects.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

import numpy as np

QUANTITY_PRESSURE = "pressure"
QUANTITY_PRESSURE_SPEED = "pressure_speed"
QUANTITIES = (QUANTITY_PRESSURE, QUANTITY_PRESSURE_SPEED)


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file, phrased for the person who must fix it.

    ``line`` is the 1-based line of the file (the header is line 1) or ``None`` for
    file-level problems; ``column`` is the column or JSON field path, or ``None``.
    ``message`` says what is wrong and what is expected.
    """

    file: str
    line: int | None
    column: str | None
    value: str | None
    message: str

    def __str__(self) -> str:  # one line for CLI output
        where = self.file
        if self.line is not None:
            where += f":{self.line}"
        if self.column:
            where += f" [{self.column}]"
        shown = f" value {self.value!r}:" if self.value not in (None, "") else ""
        return f"{where}:{shown} {self.message}"


@dataclass
class Histogram:
    """One time-at-pressure histogram of one drive loop over one period.

    ``pressure_low_bar``/``pressure_high_bar`` have shape (P,), sorted ascending by
    low edge, gaps allowed, no overlaps. For ``quantity == "pressure_speed"`` the
    speed bands ``speed_low_rpm``/``speed_high_rpm`` have shape (S,) and ``hours``
    has shape (P, S); for ``quantity == "pressure"`` the speed arrays are ``None`` and
    ``hours`` has shape (P,). ``line`` is the first source line (for messages);
    ``oil_temp_c`` the period mean operating oil temperature [degC] if the export gives one.
    """

    unit: str
    position: str
    quantity: str
    period_start: datetime
    period_end: datetime
    hour_meter_start: float
    hour_meter_end: float
    pressure_low_bar: np.ndarray
    pressure_high_bar: np.ndarray
    hours: np.ndarray
    speed_low_rpm: np.ndarray | None = None
    speed_high_rpm: np.ndarray | None = None
    mean_speed_rpm: float | None = None
    line: int | None = None
    oil_temp_c: float | None = None  # period mean operating oil temperature [degC]

    @property
    def total_hours(self) -> float:
        return float(np.sum(self.hours))


@dataclass
class Reading:
    """One service-check reading of one component (any measured field may be None)."""

    unit: str
    position: str
    taken_at: datetime
    hour_meter: float
    case_drain_lpm: float | None = None
    test_pressure_bar: float | None = None
    oil_temp_c: float | None = None
    iso4406: str | None = None
    line: int | None = None
