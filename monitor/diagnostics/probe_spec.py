"""The probe's description as a value: kind, geometry, size, current sign, ion species, smoothing."""

from __future__ import annotations

import math
from dataclasses import dataclass

from monitor.physics.constants import ATOMIC_MASS

__all__ = ["ProbeSpec", "KINDS", "GEOMETRIES"]

KINDS = ("single", "double")
GEOMETRIES = ("cylinder", "sphere", "plane")


@dataclass(frozen=True)
class ProbeSpec:
    """A Langmuir probe, SI units.

    ``radius`` and ``length`` (m) describe a cylinder (collecting area
    2 pi r l, the end face neglected) or a sphere (radius only, 4 pi r^2); a
    plane gives ``area`` (m^2, one collecting face). ``area`` given for a
    cylinder or sphere overrides the computed one. ``current_sign`` multiplies
    the instrument's current so that collected electron current is positive.
    ``ion_mass_u`` (u) and ``ion_charge`` (Z) come from the device.
    ``smooth_points`` is the Savitzky-Golay window in points (odd; None: about
    1/40 of the sweep, at least 5). For a double probe ``area`` is the area of
    each of the two (equal) tips.
    """

    kind: str = "single"
    geometry: str = "cylinder"
    radius: float | None = 1.0e-4
    length: float | None = 5.0e-3
    area: float | None = None
    current_sign: float = 1.0
    ion_mass_u: float = 39.948
    ion_charge: float = 1.0
    smooth_points: int | None = None

    @property
    def collecting_area(self) -> float:
        """Collecting area (m^2): the given area, else 2 pi r l (cylinder) or 4 pi r^2 (sphere)."""
        if self.area is not None:
            return self.area
        if self.geometry == "cylinder" and self.radius is not None and self.length is not None:
            return 2.0 * math.pi * self.radius * self.length
        if self.geometry == "sphere" and self.radius is not None:
            return 4.0 * math.pi * self.radius ** 2
        return math.nan

    @property
    def size(self) -> float:
        """The length compared with the Debye length: the radius, or for a plane sqrt(area / pi)."""
        if self.radius is not None and self.geometry != "plane":
            return self.radius
        return math.sqrt(self.collecting_area / math.pi)

    @property
    def ion_mass(self) -> float:
        """Ion mass (kg)."""
        return self.ion_mass_u * ATOMIC_MASS
