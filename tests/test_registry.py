"""Tests of monitor.registry: the sample fleet loads, each bad entry names its field path."""

from datetime import UTC, datetime
from pathlib import Path

import pytest
import yaml

from monitor.ingest.registry import dump_registry, load_registry

DATA = Path(__file__).parent / "data"
GOOD = (DATA / "fleet.yaml").read_text()


def edit(change) -> str:
    """The sample registry with ``change(doc)`` applied, as YAML text."""
    doc = yaml.safe_load(GOOD)
    change(doc)
    return yaml.safe_dump(doc, sort_keys=False)


def problems(text: str) -> dict[str, str]:
    reg, probs = load_registry(text, "fleet.yaml")
    assert reg is None and probs
    return {p.column: p.message for p in probs}


def test_sample_fleet_loads():
    reg, probs = load_registry(GOOD, "fleet.yaml")
    assert probs == []
    assert [s.name for s in reg.sites] == ["Larkspur Ridge Quarry", "Tamsin Vale Sawmill"]
    assert [u.tag for u in reg.units] == ["LR-101", "LR-102", "TM-201"]
    hx90, hx55 = reg.component_models
    assert hx90.cutoff_bar == 420 and hx55.cutoff_bar is None
    assert hx90.case_drain_limit == pytest.approx(3.2)  # 2.0 x 1.6 L/min
    assert hx55.case_drain_limit == 2.4 and hx55.life_exponent == pytest.approx(10 / 3)
    assert hx55.low_side_bar == 0.0 and hx55.bearing_type is None
    assert hx90.bearing_type == "roller" and hx90.bearing_fatigue_limit_kn == 13.5
    assert reg.oils[0].iso_vg == 46 and reg.oils[0].viscosity_index == 100
    lr101, lr102, tm201 = reg.units
    assert lr101.service[0].at == datetime(2026, 1, 12, 9, 30, tzinfo=UTC)
    assert lr101.service[0].note == "valve plate lapped"
    change = lr102.service[0]
    assert change.position is None and change.new_hour_meter == 0.0
    assert change.at == datetime(2025, 11, 3, 13, 0, tzinfo=UTC)  # +01:00 -> UTC
    assert tm201.components[0].serial == "0042"


def test_dump_load_round_trip():
    reg, _ = load_registry(GOOD, "fleet.yaml")
    text = dump_registry(reg)
    again, probs = load_registry(text, "dumped.yaml")
    assert probs == [] and again == reg


def test_bytes_and_file_like_sources():
    reg, _ = load_registry(GOOD.encode(), "b.yaml")
    with open(DATA / "fleet.yaml", "rb") as fh:
        reg2, _ = load_registry(fh, "f.yaml")
    assert reg == reg2


@pytest.mark.parametrize(
    ("change", "path", "fragment"),
    [
        (
            lambda d: d["component_models"][1].update(rated_dp_bar=-5),
            "component_models[1].rated_dp_bar",
            "> 0",
        ),
        (
            lambda d: d["component_models"][1].update(rated_dp_bar="380"),
            "component_models[1].rated_dp_bar",
            "pressure in bar",
        ),
        (
            lambda d: d["component_models"][0].update(kind="turbine"),
            "component_models[0].kind",
            "one of pump, motor",
        ),
        (
            lambda d: d["component_models"][0].update(cutoff_bar=460),
            "component_models[0].cutoff_bar",
            "below relief_bar (450 bar)",
        ),
        (
            lambda d: d["component_models"][0].pop("relief_bar"),
            "component_models[0].relief_bar",
            "missing required field",
        ),
        (
            lambda d: d["component_models"][0].update(colour="red"),
            "component_models[0].colour",
            "known fields are name, kind",
        ),
        (
            lambda d: d["component_models"][0]["bearing"].update(type="needle"),
            "component_models[0].bearing.type",
            "one of ball, roller",
        ),
        (
            lambda d: d["component_models"][1]["case_drain"].update(limit_factor=2),
            "component_models[1].case_drain",
            "exactly one of limit_factor",
        ),
        (lambda d: d["oils"][0].update(iso_vg=45), "oils[0].iso_vg", "ISO 3448 grade"),
        (
            lambda d: d["oils"][0].update(nu40_mm2s=46),
            "oils[0]",
            "either iso_vg and viscosity_index",
        ),
        (
            lambda d: d["units"][0].update(site="Nowhere Pit"),
            "units[0].site",
            "no site named `Nowhere Pit`",
        ),
        (lambda d: d["units"][0].update(oil="mystery-oil"), "units[0].oil", "no oil named"),
        (
            lambda d: d["units"][2]["components"][0].update(model="ZZ-1"),
            "units[2].components[0].model",
            "no component model named `ZZ-1`",
        ),
        (
            lambda d: d["units"][1]["components"][1].update(position="left"),
            "units[1].components[1].position",
            "must be unique",
        ),
        (lambda d: d["units"][1].update(tag="LR-101"), "units[1].tag", "must be unique"),
        (
            lambda d: d["units"][0]["service"][0].update(at="2026-01-12T09:30:00"),
            "units[0].service[0].at",
            "with an offset",
        ),
        (
            lambda d: d["units"][0]["service"][0].update(kind="repaint"),
            "units[0].service[0].kind",
            "one of rebuild, replacement, hour_meter_change",
        ),
        (
            lambda d: d["units"][0]["service"][0].update(position="middle"),
            "units[0].service[0].position",
            "no component at `middle`",
        ),
        (
            lambda d: d["units"][1]["service"][0].pop("new_hour_meter"),
            "units[1].service[0].new_hour_meter",
            "missing required field",
        ),
        (lambda d: d.update(depots=[]), "depots", "known sections are oils"),
    ],
)
def test_bad_entry_names_its_field_path(change, path, fragment):
    found = problems(edit(change))
    assert path in found, found
    assert fragment in found[path]


def test_problems_carry_source_lines():
    text = GOOD.replace("rated_dp_bar: 350", "rated_dp_bar: -350")
    reg, probs = load_registry(text, "fleet.yaml")
    (p,) = probs
    assert p.line == GOOD.splitlines().index("    rated_dp_bar: 350") + 1


def test_all_problems_collected():
    def change(d):
        d["component_models"][0]["kind"] = "turbine"
        d["units"][0]["oil"] = "mystery-oil"
        d["sites"][0]["name"] = ""

    found = problems(edit(change))
    assert {"component_models[0].kind", "sites[0].name"} <= set(found)


def test_invalid_yaml_and_wrong_top_level():
    reg, probs = load_registry("units: [\n  - tag: A\n", "broken.yaml")
    assert reg is None and "invalid YAML" in probs[0].message
    assert problems("- just\n- a list\n")[""].startswith("expected a mapping")
