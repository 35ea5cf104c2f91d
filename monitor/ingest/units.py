"""Unit spellings, conversion to the canonical internal units, and valid ranges.

Canonical internal units: pressure [bar], speed [rpm], time [h], flow [L/min],
temperature [degC]. Exports name their units in CSV header suffixes
(``pressure_low_psi``) and JSON ``*_unit`` fields; the accepted spellings are listed in
:data:`SPELLINGS` and matched case-insensitively.

A general units library reads ``c`` and ``f`` as the speed of light and the farad, so
every spelling is mapped explicitly to a pint unit name before anything is converted.
Conversion is linear (``canonical = value * scale + offset``); the scale and offset are
computed once per (kind, unit) with pint and applied to whole numpy arrays.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import numpy.typing as npt


@lru_cache(maxsize=1)
def unit_registry():  # noqa: ANN201 - a pint.UnitRegistry
    """The one pint registry of the package (used at the edge only).

    Built on first use: importing pint and reading its unit definitions takes about a
    second, and a file whose columns are already in the canonical units never needs it.
    """
    import pint

    return pint.UnitRegistry()


PRESSURE = "pressure"
FLOW = "flow"
TEMPERATURE = "temperature"
SPEED = "speed"
KINDS = (PRESSURE, FLOW, TEMPERATURE, SPEED)

CANONICAL = {PRESSURE: "bar", FLOW: "L/min", TEMPERATURE: "degC", SPEED: "rpm"}
"""Canonical unit of each kind, as shown to users."""

SHORT_SPELLINGS = {
    PRESSURE: ("bar", "psi", "mpa", "kpa"),
    FLOW: ("lpm", "gpm"),
    TEMPERATURE: ("c", "f"),
    SPEED: ("rpm",),
}
"""The short spellings of each kind, used as CSV header suffixes (``pressure_low_psi``)."""

SPELLINGS: dict[str, dict[str, str]] = {
    PRESSURE: {"bar": "bar", "psi": "psi", "mpa": "mpa", "kpa": "kpa"},
    FLOW: {"lpm": "lpm", "l/min": "lpm", "gpm": "gpm", "gal/min": "gpm"},
    TEMPERATURE: {
        "c": "c",
        "degc": "c",
        "°c": "c",
        "f": "f",
        "degf": "f",
        "°f": "f",
    },
    SPEED: {"rpm": "rpm", "r/min": "rpm"},
}
"""Accepted spelling (lower case) -> short canonical spelling, per kind."""

_LONG_FORMS = {
    PRESSURE: ("MPa", "kPa"),
    FLOW: ("L/min", "gal/min"),
    TEMPERATURE: ("degC", "°C", "degF", "°F"),
    SPEED: ("r/min",),
}

_PINT_NAMES = {
    "bar": "bar",
    "psi": "psi",
    "mpa": "megapascal",
    "kpa": "kilopascal",
    "lpm": "liter / minute",
    "gpm": "gallon / minute",  # pint's gallon is the US liquid gallon (3.785411784 L)
    "c": "degC",
    "f": "degF",
    "rpm": "revolution / minute",
}
_PINT_CANONICAL = {
    PRESSURE: "bar",
    FLOW: "liter / minute",
    TEMPERATURE: "degC",
    SPEED: "revolution / minute",
}

PRESSURE_RANGE_BAR = (0.0, 1000.0)
"""Valid gauge pressure after conversion [bar], inclusive (common practice, no source)."""
SPEED_RANGE_RPM = (0.0, 10000.0)
"""Valid shaft speed [rpm], inclusive (common practice, no source)."""
FLOW_RANGE_LPM = (0.0, 1000.0)
"""Valid case-drain flow [L/min], inclusive (common practice, no source)."""
TEMPERATURE_RANGE_C = (-50.0, 200.0)
"""Valid oil temperature [degC], inclusive (common practice, no source)."""

RANGES = {
    PRESSURE: PRESSURE_RANGE_BAR,
    FLOW: FLOW_RANGE_LPM,
    TEMPERATURE: TEMPERATURE_RANGE_C,
    SPEED: SPEED_RANGE_RPM,
}


def accepted_spellings(kind: str) -> str:
    """Human-readable list of the spellings accepted for ``kind``.

    Parameters
    ----------
    kind : str
        One of :data:`KINDS`.

    Returns
    -------
    str
        E.g. ``"bar, psi, mpa, kpa (any case; also MPa, kPa)"``.
    """
    _check_kind(kind)
    text = ", ".join(SHORT_SPELLINGS[kind])
    extra = _LONG_FORMS[kind]
    if extra:
        text += " (any case; also " + ", ".join(extra) + ")"
    return text


def _check_kind(kind: str) -> None:
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {', '.join(KINDS)}, got {kind!r}")


def normalise_unit(kind: str, spelling: str) -> str:
    """Map an accepted unit spelling to its short canonical spelling.

    Parameters
    ----------
    kind : str
        One of ``pressure``, ``flow``, ``temperature``, ``speed``.
    spelling : str
        The unit as written in the file, case-insensitive, surrounding blanks ignored.

    Returns
    -------
    str
        The short spelling: pressure ``bar|psi|mpa|kpa``, flow ``lpm|gpm``,
        temperature ``c|f``, speed ``rpm``.

    Raises
    ------
    ValueError
        If ``kind`` is unknown or ``spelling`` is not accepted; the message lists the
        accepted spellings.
    """
    _check_kind(kind)
    key = str(spelling).strip().lower()
    try:
        return SPELLINGS[kind][key]
    except KeyError:
        raise ValueError(
            f"unknown {kind} unit {spelling!r}: use one of {accepted_spellings(kind)}"
        ) from None


@lru_cache(maxsize=64)
def linear_factors(kind: str, spelling: str) -> tuple[float, float]:
    """Scale and offset that take values in ``spelling`` to the canonical unit.

    Parameters
    ----------
    kind : str
        One of :data:`KINDS`.
    spelling : str
        An accepted spelling (see :func:`normalise_unit`).

    Returns
    -------
    tuple of float
        ``(scale, offset)`` with ``canonical = value * scale + offset``.

    Notes
    -----
    Computed with pint: the scale from 1 of the source unit (a temperature
    difference for temperatures), the offset from 0 of the source unit.
    """
    short = normalise_unit(kind, spelling)
    src = _PINT_NAMES[short]
    dst = _PINT_CANONICAL[kind]
    if src == dst:  # already canonical: no conversion, and no pint to load
        return 1.0, 0.0
    ureg = unit_registry()
    if kind != TEMPERATURE:
        return float(ureg.Quantity(1.0, src).to(dst).magnitude), 0.0
    scale = ureg.Quantity(1.0, "delta_" + src).to("delta_" + dst).magnitude
    offset = ureg.Quantity(0.0, src).to(dst).magnitude
    return float(scale), float(offset)


def convert(values: npt.ArrayLike, kind: str, unit: str) -> np.ndarray:
    """Convert values of ``kind`` in ``unit`` to the canonical unit (vectorised).

    Parameters
    ----------
    values : array_like
        Values in ``unit``; NaN stays NaN.
    kind : str
        One of :data:`KINDS`.
    unit : str
        An accepted spelling.

    Returns
    -------
    numpy.ndarray
        float64 values in the canonical unit of ``kind`` [bar, L/min, degC or rpm].
    """
    scale, offset = linear_factors(kind, unit)
    arr = np.asarray(values, dtype=np.float64)
    if scale == 1.0 and offset == 0.0:
        return arr.copy()
    with np.errstate(over="ignore"):  # beyond the float range: inf, refused by the range check
        out = arr * scale
        if offset != 0.0:
            out += offset
    return out


def to_bar(values: npt.ArrayLike, unit: str) -> np.ndarray:
    """Pressure in ``unit`` (bar, psi, MPa, kPa) -> [bar]."""
    return convert(values, PRESSURE, unit)


def to_lpm(values: npt.ArrayLike, unit: str) -> np.ndarray:
    """Flow in ``unit`` (L/min or US gal/min) -> [L/min]."""
    return convert(values, FLOW, unit)


def to_celsius(values: npt.ArrayLike, unit: str) -> np.ndarray:
    """Temperature in ``unit`` (degC or degF) -> [degC]."""
    return convert(values, TEMPERATURE, unit)


def to_rpm(values: npt.ArrayLike, unit: str = "rpm") -> np.ndarray:
    """Speed in ``unit`` (rpm) -> [rpm]."""
    return convert(values, SPEED, unit)


def out_of_range(values: np.ndarray, kind: str) -> np.ndarray:
    """Mask of finite values outside the valid range of ``kind`` (canonical units).

    Parameters
    ----------
    values : numpy.ndarray
        Values in the canonical unit of ``kind``.
    kind : str
        One of :data:`KINDS`.

    Returns
    -------
    numpy.ndarray of bool
        True where a finite value lies outside :data:`RANGES` ``[kind]``; NaN is False.
    """
    lo, hi = RANGES[kind]
    with np.errstate(invalid="ignore"):
        return (values < lo) | (values > hi)
