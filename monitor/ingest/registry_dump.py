"""Fleet registry: write a :class:`~monitor.domain.specs.Registry` as YAML in the
documented schema (read back equal by :func:`monitor.ingest.registry.load_registry`)."""

from __future__ import annotations

from dataclasses import fields
from datetime import datetime
from typing import Any

import yaml

from monitor.domain.specs import ComponentModelSpec, Registry


def dump_registry(registry: Registry) -> str:
    """YAML text of ``registry`` in the documented schema (read back equal by load_registry).

    Parameters
    ----------
    registry : Registry
        The registry to write.

    Returns
    -------
    str
        YAML text; optional fields that are unset are left out.
    """
    doc = {
        "oils": [_plain(o) for o in registry.oils],
        "component_models": [_model_plain(m) for m in registry.component_models],
        "sites": [_plain(s) for s in registry.sites],
        "units": [
            {
                **_plain(u, skip=("components", "service")),
                "components": [_plain(c) for c in u.components],
                "service": [_plain(s) for s in u.service],
            }
            for u in registry.units
        ],
    }
    return yaml.safe_dump(doc, sort_keys=False, allow_unicode=True)


def _plain(obj: Any, skip: tuple[str, ...] = ()) -> dict:
    out = {}
    for f in fields(obj):
        v = getattr(obj, f.name)
        if f.name in skip or v is None:
            continue
        out[f.name] = v.isoformat() if isinstance(v, datetime) else v
    return out


def _model_plain(m: ComponentModelSpec) -> dict:
    flat = _plain(m)
    out: dict[str, Any] = {
        k: v for k, v in flat.items() if not k.startswith(("case_drain_", "bearing_"))
    }
    for block in ("case_drain", "bearing"):
        sub = {k[len(block) + 1 :]: v for k, v in flat.items() if k.startswith(block + "_")}
        if block == "case_drain" and set(sub) == {"flushing_lpm"}:
            continue  # only the default: no case-drain data
        if sub:
            out[block] = sub
    return out
