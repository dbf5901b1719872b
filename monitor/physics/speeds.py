"""Maxwellian electron speeds: most probable, mean, rms and the thermal speed sqrt(kT/m) (m/s)."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from monitor.physics.constants import ELECTRON_MASS, ELEMENTARY_CHARGE

__all__ = ["thermal_speed", "most_probable_speed", "mean_speed", "rms_speed",
           "MOST_PROBABLE_FACTOR", "MEAN_FACTOR", "RMS_FACTOR"]

# Ratios of the Maxwellian speeds to the thermal speed sqrt(kT/m).
MOST_PROBABLE_FACTOR = math.sqrt(2.0)
MEAN_FACTOR = math.sqrt(8.0 / math.pi)
RMS_FACTOR = math.sqrt(3.0)


def thermal_speed(T: ArrayLike, mass: float = ELECTRON_MASS) -> np.ndarray:
    """Thermal speed v_T = sqrt(k T / m), m/s (the handbook convention), T in eV.

    This is the speed used for the mean free path and the gyroradius.
    Checked against the NRL Plasma Formulary (v_Te = 4.19e7 Te^1/2 cm/s) and
    PlasmaPy's ``thermal_speed(method="rms", ndim=1)``.
    """
    with np.errstate(all="ignore"):
        return np.sqrt(np.asarray(T, dtype=np.float64) * (ELEMENTARY_CHARGE / mass))


def most_probable_speed(T: ArrayLike, mass: float = ELECTRON_MASS) -> np.ndarray:
    """Maxwellian most probable speed sqrt(2 k T / m), m/s; PlasmaPy's default thermal speed."""
    return MOST_PROBABLE_FACTOR * thermal_speed(T, mass)


def mean_speed(T: ArrayLike, mass: float = ELECTRON_MASS) -> np.ndarray:
    """Maxwellian mean speed sqrt(8 k T / (pi m)), m/s; PlasmaPy ``method="mean_magnitude"``."""
    return MEAN_FACTOR * thermal_speed(T, mass)


def rms_speed(T: ArrayLike, mass: float = ELECTRON_MASS) -> np.ndarray:
    """Maxwellian root-mean-square speed sqrt(3 k T / m), m/s; PlasmaPy ``method="rms"`` (3-D)."""
    return RMS_FACTOR * thermal_speed(T, mass)
