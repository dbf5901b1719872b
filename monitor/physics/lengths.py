"""Lengths: Debye length, thermal gyroradii and the electron mean free path (SI, temperatures in eV)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from monitor.physics.constants import ATOMIC_MASS, ELECTRON_MASS, ELEMENTARY_CHARGE, EPSILON_0

__all__ = ["debye_length", "electron_gyroradius", "ion_gyroradius", "electron_mean_free_path"]


def debye_length(ne: ArrayLike, Te: ArrayLike) -> np.ndarray:
    """Electron Debye length lambda_D = sqrt(eps0 k Te / (ne e^2)), m.

    ne in m^-3, Te in eV. Checked against the NRL Plasma Formulary
    (lambda_D = 7.43e2 Te^1/2 ne^-1/2 cm, ne in cm^-3) and PlasmaPy's
    ``lengths.Debye_length``.
    """
    with np.errstate(all="ignore"):
        return np.sqrt(EPSILON_0 / ELEMENTARY_CHARGE * np.asarray(Te, dtype=np.float64)
                       / np.asarray(ne, dtype=np.float64))


def electron_gyroradius(Te: ArrayLike, B: ArrayLike) -> np.ndarray:
    """Electron thermal gyroradius r_e = v_Te / omega_ce with v_Te = sqrt(k Te / me), m.

    Non-relativistic; |B| in T, Te in eV. Checked against the NRL Plasma
    Formulary (r_e = 2.38 Te^1/2 B^-1 cm, B in gauss) and PlasmaPy's
    ``lengths.gyroradius`` given the same perpendicular speed.
    """
    te = np.asarray(Te, dtype=np.float64)
    b = np.abs(np.asarray(B, dtype=np.float64))
    with np.errstate(all="ignore"):
        return np.sqrt(ELEMENTARY_CHARGE * te / ELECTRON_MASS) * ELECTRON_MASS / (ELEMENTARY_CHARGE * b)


def ion_gyroradius(Ti: ArrayLike, B: ArrayLike, A: float, Z: float) -> np.ndarray:
    """Ion thermal gyroradius r_i = v_Ti / omega_ci, v_Ti = sqrt(k Ti / m_i), m_i = A u, m.

    Ti in eV, |B| in T, charge Z e. Checked against the NRL Plasma Formulary
    (r_i = 1.02e2 mu^1/2 Z^-1 Ti^1/2 B^-1 cm, mu = m_i / m_p) and PlasmaPy.
    """
    mi = A * ATOMIC_MASS
    ti = np.asarray(Ti, dtype=np.float64)
    b = np.abs(np.asarray(B, dtype=np.float64))
    with np.errstate(all="ignore"):
        return np.sqrt(ELEMENTARY_CHARGE * ti / mi) * mi / (Z * ELEMENTARY_CHARGE * b)


def electron_mean_free_path(v_thermal: ArrayLike, collision_frequency: ArrayLike) -> np.ndarray:
    """Electron mean free path lambda_mfp = v_Te / (nu_ei + nu_en), m.

    ``v_thermal`` is the electron thermal speed sqrt(k Te / me) and
    ``collision_frequency`` the total electron collision rate (1/s). The
    definition lambda = v / nu (NRL Plasma Formulary, "collisions and
    transport", from memory; common practice).
    """
    with np.errstate(all="ignore"):
        return np.asarray(v_thermal, dtype=np.float64) / np.asarray(collision_frequency, dtype=np.float64)
