"""Fleet registry records: oils, component models, sites, units, service events.

Field names follow the registry YAML (README "Fleet registry"); nested YAML blocks
(case_drain, bearing) are flattened with their block name as prefix. Canonical units as
in :mod:`monitor.domain.records`.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime


@dataclass(frozen=True)
class OilSpec:
    name: str
    iso_vg: float | None = None
    viscosity_index: float | None = None
    nu40_mm2s: float | None = None
    nu100_mm2s: float | None = None
    # ISO 281 contamination level (e.g. "normal cleanliness"); a site's level wins
    contamination_level: str | None = None


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
    operating_temp_c: float | None = None  # oil temperature in service [degC]

    @property
    def has_bearing_data(self) -> bool:
        """True when the model carries what the ISO 281 oil-condition factor needs."""
        return None not in (
            self.bearing_type,
            self.bearing_pitch_diameter_mm,
            self.bearing_fatigue_limit_kn,
            self.bearing_load_at_rated_kn,
        )

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
    contamination_level: str | None = None  # ISO 281 level; wins over the oil's


@dataclass(frozen=True)
class ComponentSpec:
    position: str
    model: str
    serial: str | None = None
    operating_temp_c: float | None = None  # overrides the unit's and the model's [degC]
    consumed_at_first_upload: float | None = None  # life used before the first upload [-]
    last_rebuild_hour_meter: float | None = None  # hour meter of the last known rebuild [h]


@dataclass(frozen=True)
class ServiceSpec:
    position: str | None  # None: the whole unit (hour-meter change)
    kind: str  # "rebuild" | "replacement" | "hour_meter_change"
    at: datetime
    hour_meter: float
    new_hour_meter: float | None = None  # hour_meter_change: reading after the change
    note: str | None = None
    reason: str | None = None  # rebuild/replacement: one of vocabulary.SERVICE_REASONS


@dataclass(frozen=True)
class UnitSpec:
    tag: str
    site: str
    machine_type: str
    oil: str
    operating_temp_c: float | None = None  # overrides the component model's [degC]
    components: tuple[ComponentSpec, ...] = ()
    service: tuple[ServiceSpec, ...] = ()


@dataclass(frozen=True)
class Registry:
    oils: tuple[OilSpec, ...] = ()
    component_models: tuple[ComponentModelSpec, ...] = ()
    sites: tuple[SiteSpec, ...] = ()
    units: tuple[UnitSpec, ...] = ()
