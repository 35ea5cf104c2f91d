"""The invented demo scenario: one oil, three component models, three sites, ~60 units.

Every name here is invented for the demo. The rating data are plausible values for
heavy-duty closed-loop pumps and motors (from memory, not from any maker's catalogue):
rated differential pressure 380-400 bar, rated speed 2200-2600 rpm, charge (low side)
pressure 24-27 bar, relief 35 bar above the pressure cut-off where a pump has one.

The rated L10 lives were calibrated so that typical units last roughly 8 000-15 000
operating hours under their duty (see ``demo_fleet.duty``).
"""

from __future__ import annotations

from dataclasses import dataclass, field

OIL = {
    "name": "hydro-46",
    "iso_vg": 46,
    "viscosity_index": 100,
    "contamination_level": "slight contamination",
}
"""The fleet oil: ISO VG 46, VI 100 (ISO 3448 grade midpoint), kept at the ISO 281 level
"slight contamination" (what its usual samples, about 18/16/13, suggest)."""

OPERATING_TEMP_C = 50.0
"""Operating oil temperature of the demo's drive loops [degC] (invented; every component
model's ``operating_temp_c`` in the demo registry)."""

OIL_NU40_MM2S = 46.0
"""Kinematic viscosity of the fleet oil at 40 degC [mm2/s] (ISO 3448 VG 46 midpoint)."""

OIL_NU100_MM2S = 6.7604
"""Kinematic viscosity at 100 degC [mm2/s] of VG 46 with VI 100.

Computed from ASTM D2270 for VI 100 (ASTM D2270-10, computed).
"""

BAND_WIDTH_BAR = 25.0
PRESSURE_TOP_BAR = 500.0

# Component models: plain dicts in the registry YAML shape (keys as written to YAML).
COMPONENT_MODELS: list[dict] = [
    {
        "name": "DS-P46",
        "kind": "pump",
        "displacement_cm3": 46.0,
        "rated_dp_bar": 380.0,
        "rated_speed_rpm": 2600.0,
        "rated_l10_h": 1500.0,
        "life_exponent": 3.333,
        "low_side_bar": 24.0,
        "relief_bar": 420.0,
        "operating_temp_c": OPERATING_TEMP_C,
        "case_drain": {
            "test_dp_bar": 250.0,
            "test_temp_c": 50.0,
            "new_lpm": 1.2,
            "limit_factor": 2.0,
            "flushing_lpm": 0.0,
        },
        "bearing": {
            "type": "roller",
            "pitch_diameter_mm": 55.0,
            "dynamic_load_kn": 95.0,
            "fatigue_limit_kn": 11.0,
            "load_at_rated_kn": 22.0,
        },
    },
    {
        "name": "DS-P90",
        "kind": "pump",
        "displacement_cm3": 90.0,
        "rated_dp_bar": 400.0,
        "rated_speed_rpm": 2400.0,
        "rated_l10_h": 2000.0,
        "life_exponent": 3.333,
        "low_side_bar": 27.0,
        "relief_bar": 435.0,
        "cutoff_bar": 400.0,
        "operating_temp_c": OPERATING_TEMP_C,
        "case_drain": {
            "test_dp_bar": 250.0,
            "test_temp_c": 50.0,
            "new_lpm": 2.2,
            "limit_factor": 2.0,
            "flushing_lpm": 0.0,
        },
        "bearing": {
            "type": "roller",
            "pitch_diameter_mm": 72.0,
            "dynamic_load_kn": 160.0,
            "fatigue_limit_kn": 19.0,
            "load_at_rated_kn": 36.0,
        },
    },
    {
        "name": "DS-M110",
        "kind": "motor",
        "displacement_cm3": 110.0,
        "rated_dp_bar": 400.0,
        "rated_speed_rpm": 2200.0,
        "rated_l10_h": 2500.0,
        "life_exponent": 3.333,
        "low_side_bar": 27.0,
        "relief_bar": 435.0,
        "operating_temp_c": OPERATING_TEMP_C,
        "case_drain": {
            "test_dp_bar": 250.0,
            "test_temp_c": 50.0,
            "new_lpm": 1.8,
            "limit_factor": 2.0,
            "flushing_lpm": 0.0,
        },
    },
]
MODELS_BY_NAME = {m["name"]: m for m in COMPONENT_MODELS}


@dataclass(frozen=True)
class MachineType:
    """How one kind of machine is built and used.

    ``positions`` maps each drive position to (component model, duty profile, speed kind).
    Speed kinds: ``engine`` (diesel-driven pump, mean speed logged), ``electric`` (fixed
    speed), ``motor`` (hydraulic motor, mean speed logged), ``motor_matrix`` (motor with a
    pressure x speed matrix).
    """

    name: str
    positions: tuple[tuple[str, str, str, str], ...]
    target_life_h: tuple[float, float] = (8000.0, 15000.0)
    wear_life_h: tuple[float, float] = (6000.0, 20000.0)


def _two_loop(name: str, model: str, duty: str, **kw) -> MachineType:
    pos = (("left", model, duty, "engine"), ("right", model, duty, "engine"))
    return MachineType(name, pos, **kw)


MACHINE_TYPES: dict[str, MachineType] = {
    mt.name: mt
    for mt in (
        _two_loop("compact track loader", "DS-P46", "loader"),
        _two_loop("skid-steer loader", "DS-P46", "skid"),
        _two_loop("crawler dozer", "DS-P90", "dozer"),
        _two_loop("tracked dumper", "DS-P46", "dumper"),
        MachineType("trencher", (("drive", "DS-P46", "trencher", "engine"),)),
        MachineType(
            "log deck conveyor",
            (("pump", "DS-P90", "conveyor", "electric"), ("motor", "DS-M110", "conveyor", "motor")),
            target_life_h=(11000.0, 18000.0),
            wear_life_h=(10000.0, 30000.0),
        ),
        MachineType(
            "debarker infeed conveyor",
            (("pump", "DS-P90", "conveyor", "electric"), ("motor", "DS-M110", "conveyor", "motor")),
            target_life_h=(11000.0, 18000.0),
            wear_life_h=(10000.0, 30000.0),
        ),
        MachineType(
            "green chain drive",
            (
                ("pump", "DS-P46", "chain", "electric"),
                ("motor", "DS-M110", "chain", "motor_matrix"),
            ),
            target_life_h=(11000.0, 18000.0),
            wear_life_h=(10000.0, 30000.0),
        ),
        MachineType(
            "trimmer chain drive",
            (("pump", "DS-P46", "chain", "electric"),),
            target_life_h=(11000.0, 18000.0),
            wear_life_h=(10000.0, 30000.0),
        ),
    )
}


@dataclass(frozen=True)
class Site:
    """One invented site: name, tag prefix, working calendar kind, and its machines."""

    name: str
    prefix: str
    calendar: str  # "quarry" | "mill" | "hire"
    roster: tuple[tuple[str, int], ...]
    meter_at_start_h: tuple[float, float] = (0.0, 0.0)


SITES: tuple[Site, ...] = (
    Site(
        "Greyfell Quarry",
        "GQ",
        "quarry",
        (
            ("compact track loader", 12),
            ("skid-steer loader", 3),
            ("crawler dozer", 2),
            ("tracked dumper", 1),
        ),
        meter_at_start_h=(1500.0, 7000.0),
    ),
    Site(
        "Sprucewater Sawmill",
        "SW",
        "mill",
        (
            ("log deck conveyor", 6),
            ("debarker infeed conveyor", 3),
            ("green chain drive", 4),
            ("trimmer chain drive", 2),
        ),
        meter_at_start_h=(8000.0, 30000.0),
    ),
    Site(
        "Tenterhook Hire Yard",
        "TH",
        "hire",
        (
            ("compact track loader", 12),
            ("skid-steer loader", 6),
            ("crawler dozer", 2),
            ("tracked dumper", 4),
            ("trencher", 2),
        ),
        meter_at_start_h=(0.0, 4000.0),
    ),
)

STORIES: dict[str, str] = {
    "stalling_loader": "GQ-05",
    "contaminated": "GQ-16",
    "near_end_conveyor": "SW-03",
    "silent": "TH-09",
    "rebuilt_recently": "SW-08",
}
"""Story role -> unit tag (see README.md). GQ-05 is a compact track loader, GQ-16 a
crawler dozer, SW-03 a log deck conveyor, TH-09 a compact track loader, SW-08 a debarker
infeed conveyor."""

REBUILT_RECENTLY_POSITION = "pump"
NEAR_END_POSITION = "pump"


@dataclass(frozen=True)
class DueRole:
    """A component the shop has let run on: where it should stand at the end date.

    ``mode`` "bearing": the last rebuild is placed so that the bearing life left at the
    end, at the unit's recent damage rate, is ``remaining_h`` [h] (negative: past its
    end of life). ``mode`` "wear": the component's wear life is set so that a Theil-Sen
    line through its case-drain readings since the last rebuild reaches the limit
    ``remaining_h`` operating hours after the end date (negative: already past it); the
    last rebuild was ``since_days`` before the end date, or at the start of monitoring
    when None. No other rebuild of the unit is done after the earliest of these lives
    began (the shop's backlog).
    """

    position: str
    mode: str
    remaining_h: float
    since_days: int | None = None


BEARING_ROLE_LIFE_H = 9500.0
"""Expected bearing life under its duty of a component with a bearing due role [h]
(a hard-worked drive, so that its life can run out inside three years of history)."""

DUE_ROLES: dict[str, tuple[DueRole, ...]] = {
    # Greyfell Quarry: loaders and a dozer whose case drains have been climbing
    "GQ-02": (DueRole("left", "wear", -40.0), DueRole("right", "wear", 150.0)),
    "GQ-04": (DueRole("left", "wear", 420.0), DueRole("right", "wear", 640.0)),
    "GQ-13": (DueRole("right", "wear", 120.0),),
    "GQ-17": (DueRole("left", "wear", 800.0, since_days=520),),
    # Sprucewater Sawmill: hard-worked conveyor and chain pumps near the end of their
    # bearing life, a worn infeed pump and a worn conveyor motor
    "SW-01": (DueRole("pump", "bearing", 760.0), DueRole("motor", "wear", 880.0, 430)),
    "SW-05": (DueRole("pump", "wear", 200.0, since_days=400),),
    "SW-11": (DueRole("pump", "bearing", 900.0),),
    "SW-14": (DueRole("pump", "bearing", -150.0),),
    # Tenterhook Hire Yard: machines back from long hires with worn drives
    "TH-03": (DueRole("left", "wear", 90.0), DueRole("right", "wear", 230.0)),
    "TH-06": (DueRole("right", "wear", 550.0, since_days=600),),
    "TH-15": (DueRole("left", "wear", 180.0),),
    "TH-20": (DueRole("left", "wear", 380.0), DueRole("right", "wear", 720.0)),
    "TH-25": (DueRole("drive", "wear", 950.0, since_days=700),),
}
"""Unit tag -> components that fall due around the end date, so the demo has something
to plan: about two at or past their end of life, six due soon and a dozen to plan ahead
(with the story units), on all three sites, several as both loops of one machine.
Invented, like everything in the scenario."""


@dataclass(frozen=True)
class UnitPlan:
    """One unit of the roster: its tag, site, machine type and index in the full fleet."""

    index: int
    tag: str
    site: Site
    machine: MachineType
    story: str | None = None
    extra: dict = field(default_factory=dict)


def full_roster() -> list[UnitPlan]:
    """Every unit of the full demo fleet, in a fixed order."""
    story_of = {tag: role for role, tag in STORIES.items()}
    units: list[UnitPlan] = []
    for site in SITES:
        number = 0
        for mtype, count in site.roster:
            for _ in range(count):
                number += 1
                tag = f"{site.prefix}-{number:02d}"
                units.append(
                    UnitPlan(len(units), tag, site, MACHINE_TYPES[mtype], story_of.get(tag))
                )
    return units


def select_roster(units_scale: float) -> list[UnitPlan]:
    """The units kept at ``units_scale`` [-]: every story unit plus the first others per site.

    Each unit keeps its index in the full fleet, so its generated data do not depend on
    the scale.
    """
    if not 0.0 <= units_scale <= 1.0:
        raise ValueError(f"units_scale must be between 0 and 1, got {units_scale!r}")
    kept: list[UnitPlan] = []
    roster = full_roster()
    for site in SITES:
        site_units = [u for u in roster if u.site is site]
        quota = round(len(site_units) * units_scale)
        others = [u for u in site_units if u.story is None][: max(0, quota)]
        keep = {u.index for u in others} | {u.index for u in site_units if u.story}
        kept.extend(u for u in site_units if u.index in keep)
    return kept
