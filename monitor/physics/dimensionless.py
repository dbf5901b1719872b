"""Dimensionless regime numbers: Debye number and ratio, Knudsen, ionisation fraction, collectivity, Hall, beta."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from monitor.physics.constants import ELEMENTARY_CHARGE, MU_0
from monitor.physics.lengths import debye_length

__all__ = ["debye_number", "debye_ratio", "knudsen_number", "ionization_fraction", "collectivity",
           "hall_parameter", "plasma_beta", "cutoff_ratio"]


def _f(x: ArrayLike) -> np.ndarray:
    return np.asarray(x, dtype=np.float64)


def debye_number(ne: ArrayLike, Te: ArrayLike) -> np.ndarray:
    """Electrons in a Debye sphere N_D = (4/3) pi ne lambda_D^3.

    Checked against the NRL Plasma Formulary (N_D = 1.72e9 T^3/2 n^-1/2, n
    in cm^-3, T in eV) and PlasmaPy's ``dimensionless.Debye_number``.
    """
    lam = debye_length(ne, Te)
    return (4.0 / 3.0) * math.pi * _f(ne) * lam**3


def debye_ratio(L: float, ne: ArrayLike, Te: ArrayLike) -> np.ndarray:
    """Quasi-neutrality margin L / lambda_D (device scale over Debye length), dimensionless.

    L in m, ne in m^-3, Te in eV. A plasma must be much larger than its Debye
    length to stay quasi-neutral (the textbook plasma criterion; common practice).
    """
    with np.errstate(all="ignore"):
        return L / debye_length(ne, Te)


def knudsen_number(mean_free_path: ArrayLike, L: float) -> np.ndarray:
    """Knudsen number Kn = lambda_mfp / L, dimensionless (mean free path and L in m).

    The usual definition of rarefied-gas dynamics (common practice): Kn << 1
    collisional, Kn >> 1 collisionless over the device.
    """
    return _f(mean_free_path) / L


def ionization_fraction(ne: ArrayLike, n0: ArrayLike) -> np.ndarray:
    """Ionisation fraction ne / (ne + n0), dimensionless (ne, n0 in m^-3).

    For singly charged ions, ni = ne: the fraction of heavy particles that are
    ions, the usual definition (common practice).
    """
    ne_a = _f(ne)
    with np.errstate(all="ignore"):
        return ne_a / (ne_a + _f(n0))


def collectivity(omega_pe: ArrayLike, collision_frequency: ArrayLike) -> np.ndarray:
    """omega_pe / (nu_ei + nu_en), dimensionless (both in rad/s and 1/s).

    > 1 means collective rather than collision-dominated: the textbook
    criterion omega tau > 1 (common practice).
    """
    with np.errstate(all="ignore"):
        return _f(omega_pe) / _f(collision_frequency)


def hall_parameter(omega_ce: ArrayLike, collision_frequency: ArrayLike) -> np.ndarray:
    """Electron Hall parameter omega_ce / (nu_ei + nu_en), dimensionless.

    > 1 means magnetised electrons (they gyrate more than once between
    collisions); PlasmaPy's ``dimensionless.Hall_parameter`` uses the same
    ratio (common practice).
    """
    with np.errstate(all="ignore"):
        return _f(omega_ce) / _f(collision_frequency)


def plasma_beta(ne: ArrayLike, Te: ArrayLike, B: ArrayLike, Ti: ArrayLike | None = None, Z: float = 1.0) -> np.ndarray:
    """beta = 2 mu0 (ne k Te + ni k Ti) / B^2 with ni = ne / Z; Te, Ti in eV, B in T.

    Without Ti the electron pressure alone (electron beta). Checked against
    the NRL Plasma Formulary (beta = 4.03e-11 n T B^-2, cgs/eV) and PlasmaPy's
    ``dimensionless.beta``.
    """
    pressure_ev = _f(ne) * _f(Te) if Ti is None else _f(ne) * (_f(Te) + _f(Ti) / Z)
    b = _f(B)
    with np.errstate(all="ignore"):
        return 2.0 * MU_0 * ELEMENTARY_CHARGE * pressure_ev / (b * b)


def cutoff_ratio(ne: ArrayLike, cutoff_density: ArrayLike) -> np.ndarray:
    """ne / n_c, dimensionless (both m^-3): above 1 the wave of the configured
    frequency cannot propagate (overdense). n_c = eps0 me (2 pi f)^2 / e^2, NRL
    Plasma Formulary (common practice); see ``densities.cutoff_density``.
    """
    return _f(ne) / _f(cutoff_density)
