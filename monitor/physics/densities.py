"""Densities: neutral gas density from pressure and the cutoff (critical) density of a wave (m^-3)."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from monitor.physics.constants import BOLTZMANN, ELECTRON_MASS, ELEMENTARY_CHARGE, EPSILON_0

__all__ = ["neutral_density", "cutoff_density"]


def neutral_density(p0: ArrayLike, Tgas: float = 300.0) -> np.ndarray:
    """Ideal-gas neutral density n0 = p0 / (k Tgas), m^-3; p0 in Pa, Tgas in K (300 K default).

    Checked against the Loschmidt constant (CODATA via scipy.constants).
    """
    return np.asarray(p0, dtype=np.float64) / (BOLTZMANN * Tgas)


def cutoff_density(f: ArrayLike) -> np.ndarray:
    """Cutoff (critical) density n_c = eps0 me (2 pi f)^2 / e^2, m^-3, for an ordinary frequency f in Hz.

    The density at which omega_pe equals the wave's angular frequency.
    Checked against PlasmaPy's ``densities.critical_density`` (which takes the
    angular frequency 2 pi f).
    """
    w = 2.0 * math.pi * np.asarray(f, dtype=np.float64)
    return EPSILON_0 * ELECTRON_MASS * w * w / ELEMENTARY_CHARGE**2
