"""Fleet registry: read and write the YAML that lists oils, component models, sites and units.

Pure: text in, :class:`~monitor.records.Registry` plus problems out. Every entry is checked
against a declared schema; problems name the field path (``component_models[1].rated_dp_bar``)
and what is expected. Nested ``case_drain`` and ``bearing`` blocks are flattened into
:class:`~monitor.records.ComponentModelSpec` fields with the block name as prefix. The
schema is documented for users in ``docs/formats.md``.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime
from typing import IO, Any

import yaml

from monitor.domain.records import Problem
from monitor.domain.specs import (
    ComponentModelSpec,
    ComponentSpec,
    OilSpec,
    Registry,
    ServiceSpec,
    SiteSpec,
    UnitSpec,
)
from monitor.domain.vocabulary import SERVICE_REASONS
from monitor.ingest.common import OPERATING_OIL_TEMP_RANGE_C
from monitor.ingest.limits import (
    EARLIEST_TIME,
    LATEST_TIME,
    MAX_HOUR_METER_H,
    MAX_TEXT_CHARS,
    MAX_YAML_BYTES,
    TIME_RANGE_TEXT,
    shorten,
)
from monitor.ingest.registry_dump import dump_registry
from monitor.ingest.units import PRESSURE_RANGE_BAR
from monitor.ingest.yaml_text import load_yaml
from monitor.models.bearings import CONTAMINATION_LEVEL_NAMES

__all__ = ["dump_registry", "load_registry"]

ISO_VG_GRADES = (2, 3, 5, 7, 10, 15, 22, 32, 46, 68, 100, 150, 220, 320, 460, 680, 1000, 1500)
"""ISO 3448 viscosity grades [mm2/s at 40 degC] (ISO 3448, from memory)."""

# Field kinds: "text", "pos" (number > 0), "num0" (number >= 0), "num" (any number),
# "hours" (0 <= h <= MAX_HOUR_METER_H),
# "pressure" (0 < bar <= 1000), ("enum", choices), "time" (ISO 8601 with offset),
# "oil_temp" (an operating oil temperature in degC), "fraction" (0 <= x <= 1).
LEVEL = (("enum", tuple(CONTAMINATION_LEVEL_NAMES)), False, None)
# Each schema maps key -> (kind, required, default).
OIL = {
    "name": ("text", True, None),
    "iso_vg": ("pos", False, None),
    "viscosity_index": ("num", False, None),
    "nu40_mm2s": ("pos", False, None),
    "nu100_mm2s": ("pos", False, None),
    "contamination_level": LEVEL,
}
MODEL = {
    "name": ("text", True, None),
    "kind": (("enum", ("pump", "motor")), True, None),
    "displacement_cm3": ("pos", True, None),
    "rated_dp_bar": ("pressure", True, None),
    "rated_speed_rpm": ("pos", True, None),
    "rated_l10_h": ("pos", True, None),
    "life_exponent": ("pos", False, 10.0 / 3.0),
    "low_side_bar": ("num0", False, 0.0),
    "relief_bar": ("pressure", True, None),
    "cutoff_bar": ("pressure", False, None),
    "case_drain": ("block", False, None),
    "bearing": ("block", False, None),
    "operating_temp_c": ("oil_temp", False, None),
}
CASE_DRAIN = {
    "test_dp_bar": ("pressure", True, None),
    "test_temp_c": ("num", True, None),
    "new_lpm": ("pos", True, None),
    "limit_factor": ("pos", False, None),
    "limit_lpm": ("pos", False, None),
    "flushing_lpm": ("num0", False, 0.0),
}
BEARING = {
    "type": (("enum", ("ball", "roller")), True, None),
    "pitch_diameter_mm": ("pos", True, None),
    "dynamic_load_kn": ("pos", True, None),
    "fatigue_limit_kn": ("pos", True, None),
    "load_at_rated_kn": ("pos", True, None),
}
SITE = {"name": ("text", True, None), "contamination_level": LEVEL}
UNIT = {
    "tag": ("text", True, None),
    "site": ("text", True, None),
    "machine_type": ("text", True, None),
    "oil": ("text", True, None),
    "operating_temp_c": ("oil_temp", False, None),
    "components": ("list", False, None),
    "service": ("list", False, None),
}
COMPONENT = {
    "position": ("text", True, None),
    "model": ("text", True, None),
    "serial": ("text", False, None),
    "operating_temp_c": ("oil_temp", False, None),
    "consumed_at_first_upload": ("fraction", False, None),
    "last_rebuild_hour_meter": ("hours", False, None),
}
SERVICE_KINDS = ("rebuild", "replacement", "hour_meter_change")
SERVICE = {
    "position": ("text", False, None),
    "kind": (("enum", SERVICE_KINDS), True, None),
    "at": ("time", True, None),
    "hour_meter": ("hours", True, None),
    "new_hour_meter": ("hours", False, None),
    "note": ("text", False, None),
    "reason": (("enum", SERVICE_REASONS), False, None),
}
SECTIONS = ("oils", "component_models", "sites", "units")

_EXPECT = {
    "text": "text",
    "pos": "a number > 0",
    "num0": "a number >= 0",
    "num": "a number",
    "hours": f"a number of hours >= 0 and <= {MAX_HOUR_METER_H:.0f}",
    "pressure": f"a pressure in bar, > 0 and <= {PRESSURE_RANGE_BAR[1]:g}",
    "time": 'an ISO 8601 timestamp with an offset, e.g. "2026-03-02T10:00:00Z"',
    "block": "a mapping of fields",
    "list": "a list",
    "oil_temp": "an operating oil temperature in degC, {} to {}".format(
        *OPERATING_OIL_TEMP_RANGE_C
    ),
    "fraction": "a fraction of the rated life from 0 to 1",
}


class _Check:
    """Collects registry problems with the field path of each."""

    def __init__(self, file: str, lines: dict[str, int]) -> None:
        self.file, self.lines, self.items = file, lines, []

    def add(self, path: str, value: Any, message: str) -> None:
        line = self.lines.get(path)
        shown = None if value is None else shorten(value)
        self.items.append(Problem(self.file, line, path, shown, message))


def load_registry(source: str | bytes | IO, name: str) -> tuple[Registry | None, list[Problem]]:
    """Read a fleet registry from YAML text.

    Parameters
    ----------
    source : str, bytes or file-like
        The YAML document.
    name : str
        File name shown in problems.

    Returns
    -------
    registry : Registry or None
        The registry in canonical units [bar, rpm, h, L/min, degC, mm2/s]; None if there
        is any problem.
    problems : list of Problem
        Every problem found, each with the field path and what is expected.

    Notes
    -----
    The text is bounded before anything walks it: at most
    :data:`~monitor.ingest.limits.MAX_YAML_BYTES`, nested at most
    :data:`~monitor.ingest.limits.MAX_YAML_DEPTH` levels, and without aliases
    (``*name``), whose expansion can make a few hundred bytes stand for billions of
    entries.
    """
    text = source if isinstance(source, str | bytes) else source.read()
    if len(text) > MAX_YAML_BYTES:
        msg = (
            f"registry is {len(text) / 2**20:.1f} MiB, larger than the "
            f"{MAX_YAML_BYTES / 2**20:.0f} MiB limit: is this the right file?"
        )
        return None, [Problem(name, None, None, None, msg)]
    if isinstance(text, bytes):
        try:
            text = text.decode("utf-8-sig")
        except UnicodeDecodeError:
            return None, [
                Problem(name, None, None, None, "registry is not UTF-8 text: save it as UTF-8")
            ]
    loaded = load_yaml(text, name)
    if isinstance(loaded, Problem):
        return None, [loaded]
    doc, node = loaded
    return _check_document(doc, _line_map(node), name)


def _check_document(doc: Any, lines: dict[str, int], name: str) -> tuple:
    """(registry or None, problems) of a loaded YAML document."""
    ck = _Check(name, lines)
    if not isinstance(doc, dict):
        ck.add("", None, "expected a mapping with the sections " + ", ".join(SECTIONS))
        return None, ck.items
    for k in doc:
        if k not in SECTIONS:
            ck.add(
                shorten(k),
                None,
                f"unknown section `{shorten(k)}`: known sections are {', '.join(SECTIONS)}",
            )
    sec = {s: _section(doc, s, ck) for s in SECTIONS}
    reg = Registry(
        oils=tuple(o for i, e in enumerate(sec["oils"]) if (o := _oil(e, f"oils[{i}]", ck))),
        component_models=tuple(
            m
            for i, e in enumerate(sec["component_models"])
            if (m := _model(e, f"component_models[{i}]", ck))
        ),
        sites=tuple(
            SiteSpec(**v)
            for i, e in enumerate(sec["sites"])
            if (v := _fields(e, SITE, f"sites[{i}]", ck))
        ),
        units=tuple(u for i, e in enumerate(sec["units"]) if (u := _unit(e, f"units[{i}]", ck))),
    )
    # names of entries that were themselves rejected still count as known for references
    raw = {
        key: {str(e.get("name")) for e in sec[sect] if isinstance(e, dict)}
        for key, sect in (("site", "sites"), ("oil", "oils"), ("model", "component_models"))
    }
    _check_references(reg, raw, ck)
    return (None if ck.items else reg), ck.items


def _line_map(node: yaml.Node | None, path: str = "", out: dict | None = None) -> dict[str, int]:
    """Field path -> 1-based source line, from the composed YAML node tree."""
    out = {} if out is None else out
    if node is None:
        return out
    out.setdefault(path, node.start_mark.line + 1)
    if isinstance(node, yaml.MappingNode):
        for k, v in node.value:
            sub = f"{path}.{k.value}" if path else str(k.value)
            out[sub] = k.start_mark.line + 1
            _line_map(v, sub, out)
    elif isinstance(node, yaml.SequenceNode):
        for i, v in enumerate(node.value):
            _line_map(v, f"{path}[{i}]", out)
    return out


def _section(doc: dict, key: str, ck: _Check) -> list:
    v = doc.get(key)
    if v is None:
        return []
    if not isinstance(v, list):
        ck.add(key, None, f"`{key}` must be a list of entries (each starting with `- `)")
        return []
    return v


def _value(v: Any, kind: Any, path: str, ck: _Check) -> tuple[bool, Any]:
    """Check one value against its kind; returns (ok, converted value)."""
    if isinstance(kind, tuple):
        if v in kind[1]:
            return True, v
        ck.add(path, v, f"expected one of {', '.join(kind[1])}")
        return False, None
    if kind == "text":
        return _text(v, path, ck)
    if kind == "time":
        return _time(v, path, ck)
    if kind in ("block", "list"):
        ok = isinstance(v, dict if kind == "block" else list)
        if not ok:
            ck.add(path, None, f"expected {_EXPECT[kind]}")
        return ok, v
    num = isinstance(v, int | float) and not isinstance(v, bool) and _finite(v)
    ok = num and (
        (kind == "num")
        or (kind == "pos" and v > 0)
        or (kind == "num0" and v >= 0)
        or (kind == "hours" and 0 <= v <= MAX_HOUR_METER_H)
        or (kind == "pressure" and PRESSURE_RANGE_BAR[0] < v <= PRESSURE_RANGE_BAR[1])
        or (kind == "oil_temp" and _OIL_T[0] <= v <= _OIL_T[1])
        or (kind == "fraction" and 0 <= v <= 1)
    )
    if not ok:
        ck.add(path, v, f"expected {_EXPECT[kind]}")
        return False, None
    return True, float(v)


_OIL_T = OPERATING_OIL_TEMP_RANGE_C


def _finite(v: int | float) -> bool:
    try:
        return math.isfinite(v)
    except OverflowError:  # an integer beyond any float
        return False


def _text(v: Any, path: str, ck: _Check) -> tuple[bool, str | None]:
    """Non-empty text (a whole number is taken as written), at most as long as the store
    holds for this field."""
    if isinstance(v, int) and not isinstance(v, bool) and _finite(v):
        v = str(v)
    if not (isinstance(v, str) and v.strip()):
        ck.add(path, v, "expected non-empty text (quote it if it looks like a number)")
        return False, None
    most = MAX_TEXT_CHARS.get(path.rsplit(".", 1)[-1])
    if most is not None and len(v.strip()) > most:
        ck.add(path, v, f"expected at most {most} characters")
        return False, None
    return True, v.strip()


def _time(v: Any, path: str, ck: _Check) -> tuple[bool, datetime | None]:
    raw = v
    if isinstance(v, str):
        try:
            v = datetime.fromisoformat(v.strip().replace("z", "Z"))
        except ValueError:
            v = None
    if isinstance(v, datetime) and v.tzinfo is not None:
        if not EARLIEST_TIME <= v < LATEST_TIME:
            ck.add(path, v.isoformat(), f"expected a time in the plausible range {TIME_RANGE_TEXT}")
            return False, None
        return True, v.astimezone(UTC)
    ck.add(path, raw, f"expected {_EXPECT['time']}")
    return False, None


def _fields(entry: Any, schema: dict, path: str, ck: _Check) -> dict | None:
    """Check a mapping against ``schema``; returns the converted values or None."""
    if not isinstance(entry, dict):
        ck.add(path, None, f"expected a mapping with the fields {', '.join(schema)}")
        return None
    before = len(ck.items)
    out = {}
    for k in entry:
        if k not in schema:
            ck.add(
                f"{path}.{shorten(k)}",
                None,
                f"unknown field `{shorten(k)}`: known fields are {', '.join(schema)}",
            )
    for k, (kind, required, default) in schema.items():
        if entry.get(k) is None:
            if required:
                ck.add(
                    f"{path}.{k}", None, f"missing required field `{k}`: expected {_expect(kind)}"
                )
            elif default is not None:
                out[k] = default
            continue
        ok, v = _value(entry[k], kind, f"{path}.{k}", ck)
        if ok:
            out[k] = v
    return out if len(ck.items) == before else None


def _expect(kind: Any) -> str:
    return f"one of {', '.join(kind[1])}" if isinstance(kind, tuple) else _EXPECT[kind]


def _oil(entry: Any, path: str, ck: _Check) -> OilSpec | None:
    v = _fields(entry, OIL, path, ck)
    if v is None:
        return None
    grade = "iso_vg" in v or "viscosity_index" in v
    points = "nu40_mm2s" in v or "nu100_mm2s" in v
    if (
        grade == points
        or (grade and len({"iso_vg", "viscosity_index"} & set(v)) < 2)
        or (points and len({"nu40_mm2s", "nu100_mm2s"} & set(v)) < 2)
    ):
        ck.add(path, None, "give either iso_vg and viscosity_index, or nu40_mm2s and nu100_mm2s")
        return None
    if grade and v["iso_vg"] not in ISO_VG_GRADES:
        ck.add(
            f"{path}.iso_vg",
            v["iso_vg"],
            f"expected an ISO 3448 grade, one of {', '.join(map(str, ISO_VG_GRADES))}",
        )
        return None
    if points and v["nu40_mm2s"] <= v["nu100_mm2s"]:
        ck.add(
            f"{path}.nu100_mm2s",
            v["nu100_mm2s"],
            "expected the viscosity at 100 degC to be below the one at 40 degC",
        )
        return None
    return OilSpec(**v)


def _model(entry: Any, path: str, ck: _Check) -> ComponentModelSpec | None:
    v = _fields(entry, MODEL, path, ck)
    if v is None:
        return None
    ok = True
    if v.get("cutoff_bar") is not None and v["cutoff_bar"] >= v["relief_bar"]:
        ck.add(
            f"{path}.cutoff_bar",
            v["cutoff_bar"],
            f"expected the pressure cut-off below relief_bar ({v['relief_bar']:g} bar)",
        )
        ok = False
    if v["low_side_bar"] >= v["relief_bar"]:
        ck.add(
            f"{path}.low_side_bar",
            v["low_side_bar"],
            f"expected the low-side pressure below relief_bar ({v['relief_bar']:g} bar)",
        )
        ok = False
    for block, schema in (("case_drain", CASE_DRAIN), ("bearing", BEARING)):
        if block in v:
            sub = _fields(v.pop(block), schema, f"{path}.{block}", ck)
            ok = ok and sub is not None and _check_block(block, sub, f"{path}.{block}", ck)
            v.update({f"{block}_{k}": x for k, x in (sub or {}).items()})
    return ComponentModelSpec(**v) if ok else None


def _check_block(block: str, v: dict, path: str, ck: _Check) -> bool:
    if block == "case_drain":
        if ("limit_factor" in v) == ("limit_lpm" in v):
            ck.add(path, None, "give exactly one of limit_factor (x new_lpm) or limit_lpm")
            return False
        if v.get("limit_factor", 2.0) <= 1.0 or v.get("limit_lpm", math.inf) <= v["new_lpm"]:
            key = "limit_factor" if "limit_factor" in v else "limit_lpm"
            ck.add(f"{path}.{key}", v[key], "expected a rebuild limit above the new-unit flow")
            return False
    elif v["fatigue_limit_kn"] >= v["dynamic_load_kn"]:
        ck.add(
            f"{path}.fatigue_limit_kn",
            v["fatigue_limit_kn"],
            "expected the fatigue load limit below the dynamic load rating",
        )
        return False
    return True


def _unit(entry: Any, path: str, ck: _Check) -> UnitSpec | None:
    v = _fields(entry, UNIT, path, ck)
    if v is None:
        return None
    comps = [
        _fields(c, COMPONENT, f"{path}.components[{i}]", ck)
        for i, c in enumerate(v.pop("components", None) or [])
    ]
    svc = [
        _fields(s, SERVICE, f"{path}.service[{i}]", ck)
        for i, s in enumerate(v.pop("service", None) or [])
    ]
    if any(c is None for c in comps) or any(s is None for s in svc):
        return None
    for i, c in enumerate(comps):
        if {"consumed_at_first_upload", "last_rebuild_hour_meter"} <= set(c):
            ck.add(
                f"{path}.components[{i}].last_rebuild_hour_meter",
                c["last_rebuild_hour_meter"],
                "give at most one of consumed_at_first_upload or last_rebuild_hour_meter",
            )
            return None
    return UnitSpec(
        **v,
        components=tuple(ComponentSpec(**c) for c in comps),
        service=tuple(ServiceSpec(**{"position": None, **s}) for s in svc),
    )


def _unique(names: list[str], what: str, path: str, ck: _Check) -> None:
    seen: set[str] = set()
    for i, n in enumerate(names):
        if n in seen:
            ck.add(
                path.format(i),
                n,
                f"{what} `{shorten(n)}` appears more than once: {what}s must be unique",
            )
        seen.add(n)


def _check_references(reg: Registry, known: dict[str, set[str]], ck: _Check) -> None:
    """Names unique; each unit's site, oil, component models and service positions exist."""
    _unique([o.name for o in reg.oils], "oil name", "oils[{}].name", ck)
    _unique([m.name for m in reg.component_models], "model name", "component_models[{}].name", ck)
    _unique([s.name for s in reg.sites], "site name", "sites[{}].name", ck)
    _unique([u.tag for u in reg.units], "unit tag", "units[{}].tag", ck)
    for i, u in enumerate(reg.units):
        p = f"units[{i}]"
        for key, val in (("site", u.site), ("oil", u.oil)):
            if val not in known[key]:
                ck.add(
                    f"{p}.{key}",
                    val,
                    f"no {key} named `{shorten(val)}`: known are {_names(known[key])}",
                )
        _unique([c.position for c in u.components], "position", p + ".components[{}].position", ck)
        for j, c in enumerate(u.components):
            if c.model not in known["model"]:
                ck.add(
                    f"{p}.components[{j}].model",
                    c.model,
                    f"no component model named `{shorten(c.model)}`: known are "
                    f"{_names(known['model'])}",
                )
        _check_service(u, p, ck)


def _check_service(u: UnitSpec, p: str, ck: _Check) -> None:
    positions = {c.position for c in u.components}
    for j, s in enumerate(u.service):
        q = f"{p}.service[{j}]"
        if s.kind == "hour_meter_change":
            if s.new_hour_meter is None:
                ck.add(
                    f"{q}.new_hour_meter",
                    None,
                    "missing required field `new_hour_meter` for an hour_meter_change: "
                    "expected the meter reading after the change, a number >= 0",
                )
            if s.reason is not None:
                ck.add(
                    f"{q}.reason",
                    s.reason,
                    "reason is only for a rebuild or replacement (why the life ended): remove it",
                )
        elif s.new_hour_meter is not None:
            ck.add(
                f"{q}.new_hour_meter",
                s.new_hour_meter,
                "new_hour_meter is only for kind hour_meter_change: remove it",
            )
        if s.position is None and s.kind != "hour_meter_change":
            ck.add(f"{q}.position", None, f"a {s.kind} needs the position of the component")
        elif s.position is not None and s.position not in positions:
            ck.add(
                f"{q}.position",
                s.position,
                f"unit {u.tag} has no component at `{shorten(s.position)}`: known are "
                f"{_names(positions)}",
            )


def _names(names: set[str], most: int = 12) -> str:
    """The first ``most`` names, sorted (and how many there are in all)."""
    shown = ", ".join(shorten(n) for n in sorted(names)[:most]) or "(none)"
    return shown if len(names) <= most else f"{shown}, ... ({len(names)} in all)"
