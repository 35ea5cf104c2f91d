"""Plain record types passed between ingest, registry, store and service.

Everything here is in the canonical internal units: pressure [bar], speed [rpm],
time [h], flow [L/min], temperature [degC], viscosity [mm2/s]. Timestamps are
timezone-aware UTC ``datetime`` objects.
"""

from __future__ import annotations

from dataclasses import dataclass, field
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
    ``hours`` has shape (P,). ``line`` is the first source line (for messages).
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


@dataclass
class ParsedFile:
    """What ingest made of one file: clean records plus every problem found.

    A file with any problem is rejected whole; ``histograms``/``readings`` are then
    informative only. ``content_sha256`` is the hash of the raw bytes (duplicate check).
    """

    name: str
    content_sha256: str
    histograms: list[Histogram] = field(default_factory=list)
    readings: list[Reading] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems


# --- fleet registry -------------------------------------------------------------
# Field names follow the registry YAML (README "Fleet registry"); nested YAML blocks
# (case_drain, bearing) are flattened with their block name as prefix.


@dataclass(frozen=True)
class OilSpec:
    name: str
    iso_vg: float | None = None
    viscosity_index: float | None = None
    nu40_mm2s: float | None = None
    nu100_mm2s: float | None = None


@dataclass(frozen=True)
class ComponentModelSpec:
    name: str
    kind: str  # "pump" | "motor"
    displacement_cm3: float
    rated_dp_bar: float
    rated_speed_rpm: float
    rated_l10_h: float
    relief_bar: float
    life_exponent: float = 10.0 / 3.0
    low_side_bar: float = 0.0
    cutoff_bar: float | None = None
    case_drain_test_dp_bar: float | None = None
    case_drain_test_temp_c: float | None = None
    case_drain_new_lpm: float | None = None
    case_drain_limit_factor: float | None = None
    case_drain_limit_lpm: float | None = None
    case_drain_flushing_lpm: float = 0.0
    bearing_type: str | None = None  # "ball" | "roller"
    bearing_pitch_diameter_mm: float | None = None
    bearing_dynamic_load_kn: float | None = None
    bearing_fatigue_limit_kn: float | None = None
    bearing_load_at_rated_kn: float | None = None

    @property
    def case_drain_limit(self) -> float | None:
        """Rebuild limit of the normalised case-drain flow [L/min], or None."""
        if self.case_drain_limit_lpm is not None:
            return self.case_drain_limit_lpm
        if self.case_drain_limit_factor is not None and self.case_drain_new_lpm is not None:
            return self.case_drain_limit_factor * self.case_drain_new_lpm
        return None


@dataclass(frozen=True)
class SiteSpec:
    name: str


@dataclass(frozen=True)
class ComponentSpec:
    position: str
    model: str
    serial: str | None = None


@dataclass(frozen=True)
class ServiceSpec:
    position: str | None  # None: the whole unit (hour-meter change)
    kind: str  # "rebuild" | "replacement" | "hour_meter_change"
    at: datetime
    hour_meter: float
    new_hour_meter: float | None = None  # hour_meter_change: reading after the change
    note: str | None = None


@dataclass(frozen=True)
class UnitSpec:
    tag: str
    site: str
    machine_type: str
    oil: str
    components: tuple[ComponentSpec, ...] = ()
    service: tuple[ServiceSpec, ...] = ()


@dataclass(frozen=True)
class Registry:
    oils: tuple[OilSpec, ...] = ()
    component_models: tuple[ComponentModelSpec, ...] = ()
    sites: tuple[SiteSpec, ...] = ()
    units: tuple[UnitSpec, ...] = ()
