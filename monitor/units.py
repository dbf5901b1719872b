"""Parse `VALUE[UNIT]` with an optional uncertainty and convert to canonical units."""

from __future__ import annotations

import math
import re

from monitor.errors import UsageError

__all__ = ["UnitError", "DIMENSIONS", "DIMENSION_OF", "unit_scale", "parse_value", "parse_uncertainty", "canonical_unit"]

# The standard atmosphere is 101325 Pa exactly (CGPM 1954; NIST SP 811, B.8); Torr is 1/760 atm.
# Boltzmann constant over elementary charge, eV per kelvin (CODATA 2018, exact
# by the SI definitions): k / e = 1.380649e-23 / 1.602176634e-19.
_EV_PER_K = 1.380649e-23 / 1.602176634e-19

# dimension -> (canonical unit, {accepted unit spelling: factor to canonical})
DIMENSIONS: dict[str, tuple[str, dict[str, float]]] = {
    "density": ("m^-3", {"m^-3": 1.0, "m-3": 1.0, "/m3": 1.0, "/m^3": 1.0,
                         "cm^-3": 1e6, "cm-3": 1e6, "/cc": 1e6, "/cm3": 1e6, "/cm^3": 1e6}),
    "temperature": ("eV", {"eV": 1.0, "keV": 1e3, "meV": 1e-3, "K": _EV_PER_K}),
    "field": ("T", {"T": 1.0, "mT": 1e-3, "G": 1e-4, "kG": 1e-1}),
    "pressure": ("Pa", {"Pa": 1.0, "mPa": 1e-3, "kPa": 1e3, "Torr": 101325.0 / 760.0,
                        "mTorr": 101325.0 / 760.0 * 1e-3, "mbar": 100.0, "bar": 1e5, "atm": 101325.0}),
    "length": ("m", {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6}),
    "frequency": ("Hz", {"Hz": 1.0, "kHz": 1e3, "MHz": 1e6, "GHz": 1e9}),
    "area": ("m^2", {"m^2": 1.0, "m2": 1.0, "cm^2": 1e-4, "cm2": 1e-4}),
    "time": ("s", {"s": 1.0, "ms": 1e-3, "us": 1e-6, "min": 60.0, "h": 3600.0}),
    "mass": ("u", {"u": 1.0, "amu": 1.0}),
    "dimensionless": ("1", {"1": 1.0, "": 1.0}),
}

# canonical input key or calc key -> dimension
DIMENSION_OF: dict[str, str] = {
    "ne": "density", "Te": "temperature", "Ti": "temperature", "B": "field",
    "p0": "pressure", "L": "length", "f": "frequency", "Tgas": "temperature_gas",
    "A": "mass", "Z": "dimensionless", "sigma_en": "area", "t": "time",
}


class UnitError(UsageError, ValueError):
    """A value or unit that cannot be read; the message names the accepted units."""


def canonical_unit(dimension: str) -> str:
    return DIMENSIONS[_dim(dimension)][0]


def _dim(dimension: str) -> str:
    # the gas temperature is configured in kelvin, unlike the plasma temperatures
    return "temperature" if dimension == "temperature_gas" else dimension


def unit_scale(unit: str, dimension: str) -> float:
    """Factor that turns a value in ``unit`` into the canonical unit of ``dimension``.

    ``temperature_gas`` is canonical in K (so eV and K swap roles).
    """
    unit = unit.strip().replace("²", "^2").replace("³", "^3").replace("μ", "u").replace("µ", "u")
    if dimension == "temperature_gas":
        if unit in ("", "K"):
            return 1.0
        if unit in DIMENSIONS["temperature"][1]:
            return DIMENSIONS["temperature"][1][unit] / _EV_PER_K
        raise UnitError(f"unknown unit {unit!r} for a gas temperature; accepted: K, eV, keV")
    try:
        canonical, table = DIMENSIONS[dimension]
    except KeyError:
        raise UnitError(f"unknown dimension {dimension!r}") from None
    if unit == "":
        return 1.0
    if unit in table:
        return table[unit]
    raise UnitError(f"unknown unit {unit!r} for {dimension}; accepted: {', '.join(u for u in table if u)}")


_NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?|[-+]?(?:inf|nan)"
_VALUE_RE = re.compile(rf"^\s*(?P<num>{_NUM})\s*(?P<unit>[^\d\s+±%-][^±]*?|)\s*$", re.IGNORECASE)


def _split_number(text: str, dimension: str) -> tuple[float, str]:
    m = _VALUE_RE.match(text)
    if not m:
        canonical, table = DIMENSIONS[_dim(dimension)] if _dim(dimension) in DIMENSIONS else ("", {})
        raise UnitError(f"cannot read {text!r} as a number with a unit; accepted units for {dimension}: "
                        f"{', '.join(u for u in table if u)}")
    return float(m.group("num")), m.group("unit").strip()


def parse_uncertainty(text: str, dimension: str, value: float) -> float:
    """Absolute standard uncertainty from ``0.5eV``, ``0.5`` (canonical) or ``20%`` of ``value``."""
    text = text.strip()
    if text.endswith("%"):
        try:
            pct = float(text[:-1])
        except ValueError:
            raise UnitError(f"cannot read uncertainty {text!r}; write e.g. 20%") from None
        if not math.isfinite(pct) or pct < 0:
            raise UnitError(f"uncertainty {text!r} must be a non-negative percentage")
        return abs(value) * pct / 100.0
    num, unit = _split_number(text, dimension)
    sigma = num * unit_scale(unit, dimension)
    if not math.isfinite(sigma) or sigma < 0:
        raise UnitError(f"uncertainty {text!r} must be finite and non-negative")
    return sigma


def parse_value(text: str | float | int, dimension: str) -> tuple[float, float | None]:
    """Read ``3eV``, ``3eV+-0.5eV``, ``3eV±0.5``, ``3eV±20%``, ``5e16cm-3`` or a bare number.

    Returns (value in canonical units, absolute sigma or None). A bare number is
    in the canonical unit. Raises UnitError naming the accepted units.
    """
    if isinstance(text, bool):
        raise UnitError(f"expected a number, got {text!r}")
    if isinstance(text, (int, float)):
        return float(text), None
    s = str(text).strip()
    sigma_text = None
    for sep in ("+-", "±", "+/-"):
        if sep in s:
            s, sigma_text = s.split(sep, 1)
            break
    num, unit = _split_number(s, dimension)
    value = num * unit_scale(unit, dimension)
    sigma = None
    if sigma_text is not None:
        sigma = parse_uncertainty(sigma_text, dimension, value)
    return value, sigma
