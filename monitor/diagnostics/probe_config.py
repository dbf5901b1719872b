"""The `[probe]` TOML table read from a Config into a ProbeSpec; errors name the file and the key."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Mapping

from monitor.config import Config
from monitor.diagnostics.probe_spec import GEOMETRIES, KINDS, ProbeSpec
from monitor.errors import ConfigError
from monitor.config import config_quantity

__all__ = ["probe_spec", "parse_probe", "PROBE_KEYS"]

PROBE_KEYS = ("kind", "geometry", "radius", "length", "area", "current_sign", "smooth_points")


def _size(table: Mapping[str, Any], key: str, dimension: str, path: str | Path | None) -> float | None:
    if key not in table:
        return None
    value = config_quantity(table[key], dimension, path, f"probe.{key}")
    if not value > 0:
        raise ConfigError(path, f"probe.{key}", f"must be finite and > 0, got {table[key]!r}")
    return value


def _choice(table: Mapping[str, Any], key: str, allowed: tuple[str, ...], default: str,
            path: str | Path | None) -> str:
    value = table.get(key, default)
    if value not in allowed:
        raise ConfigError(path, f"probe.{key}", f"expected one of {', '.join(map(repr, allowed))}, got {value!r}")
    return str(value)


def parse_probe(table: Mapping[str, Any], path: str | Path | None, *, ion_mass_u: float = 39.948,
                ion_charge: float = 1.0) -> ProbeSpec:
    """A ProbeSpec from the `[probe]` table (radius, length in length units, area in area units, e.g.
    "0.1mm", "5mm", "2cm^2"); the ion species is the device's A and Z."""
    if not isinstance(table, Mapping):
        raise ConfigError(path, "probe", "expected a table")
    extra = sorted(set(table) - set(PROBE_KEYS))
    if extra:
        raise ConfigError(path, f"probe.{extra[0]}", f"unknown key; accepted: {', '.join(PROBE_KEYS)}")
    kind = _choice(table, "kind", KINDS, "single", path)
    geometry = _choice(table, "geometry", GEOMETRIES, "cylinder", path)
    radius = _size(table, "radius", "length", path)
    length = _size(table, "length", "length", path)
    area = _size(table, "area", "area", path)
    if geometry == "plane" and area is None:
        raise ConfigError(path, "probe.area", "a plane probe needs its collecting area, e.g. area = \"1cm^2\"")
    if geometry == "cylinder" and area is None and (radius is None or length is None):
        missing = "radius" if radius is None else "length"
        raise ConfigError(path, f"probe.{missing}", "a cylinder needs radius and length (or area)")
    if geometry == "sphere" and area is None and radius is None:
        raise ConfigError(path, "probe.radius", "a sphere needs its radius (or area)")
    sign = table.get("current_sign", 1)
    if isinstance(sign, bool) or sign not in (1, -1):
        raise ConfigError(path, "probe.current_sign", f"expected 1 or -1, got {sign!r}")
    smooth = table.get("smooth_points")
    if smooth is not None and (isinstance(smooth, bool) or not isinstance(smooth, int) or smooth < 5):
        raise ConfigError(path, "probe.smooth_points", f"expected an integer >= 5, got {smooth!r}")
    return ProbeSpec(kind=kind, geometry=geometry, radius=radius, length=length, area=area,
                     current_sign=float(sign), ion_mass_u=ion_mass_u, ion_charge=ion_charge,
                     smooth_points=smooth)


def probe_spec(config: Config) -> ProbeSpec:
    """The probe of a loaded Config (`[probe]` table, A and Z from `[device]`); without a `[probe]` table
    the ProbeSpec defaults (a single cylinder, r = 0.1 mm, l = 5 mm)."""
    dev = config.device
    if "probe" not in config.raw:
        return ProbeSpec(ion_mass_u=dev.ion_mass_u, ion_charge=dev.ion_charge)
    return parse_probe(config.raw["probe"], config.path, ion_mass_u=dev.ion_mass_u, ion_charge=dev.ion_charge)
