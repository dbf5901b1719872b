"""Angular frequencies: electron and ion plasma and cyclotron frequencies (rad/s, SI)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from monitor.physics.constants import ATOMIC_MASS, ELECTRON_MASS, ELEMENTARY_CHARGE, EPSILON_0

__all__ = ["electron_plasma_frequency", "ion_plasma_frequency",
           "electron_cyclotron_frequency", "ion_cyclotron_frequency"]


def electron_plasma_frequency(ne: ArrayLike) -> np.ndarray:
    """omega_pe = sqrt(ne e^2 / (eps0 me)), rad/s (angular), ne in m^-3.

    Checked against the NRL Plasma Formulary (omega_pe = 5.64e4 ne^1/2 rad/s,
    ne in cm^-3) and PlasmaPy's ``frequencies.plasma_frequency`` (angular).
    """
    with np.errstate(all="ignore"):
        return np.sqrt(np.asarray(ne, dtype=np.float64) * ELEMENTARY_CHARGE**2 / (EPSILON_0 * ELECTRON_MASS))


def ion_plasma_frequency(ne: ArrayLike, A: float, Z: float) -> np.ndarray:
    """omega_pi = sqrt(ni Z^2 e^2 / (eps0 m_i)) with ni = ne / Z and m_i = A u, rad/s.

    Checked against the NRL Plasma Formulary (omega_pi = 1.32e3 Z mu^-1/2
    ni^1/2 rad/s, mu = m_i / m_p) and PlasmaPy's ``plasma_frequency`` for the ion.
    """
    with np.errstate(all="ignore"):
        return np.sqrt(np.asarray(ne, dtype=np.float64) * Z * ELEMENTARY_CHARGE**2
                       / (EPSILON_0 * A * ATOMIC_MASS))


def electron_cyclotron_frequency(B: ArrayLike) -> np.ndarray:
    """omega_ce = e |B| / me, rad/s (angular, unsigned), B in T.

    Checked against the NRL Plasma Formulary (omega_ce = 1.76e7 B rad/s, B
    in gauss) and PlasmaPy's ``frequencies.gyrofrequency``.
    """
    return np.abs(np.asarray(B, dtype=np.float64)) * (ELEMENTARY_CHARGE / ELECTRON_MASS)


def ion_cyclotron_frequency(B: ArrayLike, A: float, Z: float) -> np.ndarray:
    """omega_ci = Z e |B| / m_i, m_i = A u, rad/s (angular, unsigned).

    Checked against the NRL Plasma Formulary (omega_ci = 9.58e3 Z mu^-1 B
    rad/s, B in gauss) and PlasmaPy's ``gyrofrequency``.
    """
    return np.abs(np.asarray(B, dtype=np.float64)) * (Z * ELEMENTARY_CHARGE / (A * ATOMIC_MASS))
