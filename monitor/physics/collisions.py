"""Collisions: the NRL electron-ion Coulomb logarithm, electron-ion and electron-neutral collision rates."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from monitor.physics.speeds import MEAN_FACTOR, thermal_speed

__all__ = ["coulomb_logarithm", "electron_ion_collision_frequency", "electron_neutral_collision_frequency",
           "COULOMB_BRANCH_EV", "NU_EI_COEFFICIENT", "COULOMB_LOW_CONST", "COULOMB_HIGH_CONST"]

# NRL Plasma Formulary, electron-ion Coulomb logarithm (ne in cm^-3, Te in eV):
#   Te < 10 Z^2 eV:  ln Lambda = 23 - ln(ne^1/2 Z Te^-3/2)
#   Te > 10 Z^2 eV:  ln Lambda = 24 - ln(ne^1/2 Te^-1)
# Rewritten with ne in m^-3 (ln ne_cm = ln ne - 6 ln 10) as constants plus logs.
COULOMB_BRANCH_EV = 10.0                                   # times Z^2
COULOMB_LOW_CONST = 23.0 + 3.0 * math.log(10.0)            # minus ln Z
COULOMB_HIGH_CONST = 24.0 + 3.0 * math.log(10.0)
# NRL Plasma Formulary electron collision rate nu_e = 2.91e-6 ne[cm^-3] lnLambda Te^-3/2 s^-1,
# rewritten for ne in m^-3.
NU_EI_COEFFICIENT = 2.91e-6 * 1e-6


def coulomb_logarithm(ne: ArrayLike, Te: ArrayLike, Z: float = 1.0) -> np.ndarray:
    """Electron-ion Coulomb logarithm, NRL Plasma Formulary formula, dimensionless.

    23 - ln(ne^1/2 Z Te^-3/2) for Te < 10 Z^2 eV, 24 - ln(ne^1/2 Te^-1) at
    and above (ne in cm^-3 inside the logarithm; this function takes m^-3).
    The formula is meant for Ti me/mi < Te; below lnLambda ~ 2 it is no
    longer meaningful (derive() flags that per sample).
    """
    ne_a = np.asarray(ne, dtype=np.float64)
    te = np.asarray(Te, dtype=np.float64)
    with np.errstate(all="ignore"):
        ln_ne = np.log(ne_a)
        ln_te = np.log(te)
        low = COULOMB_LOW_CONST - math.log(Z) - 0.5 * ln_ne + 1.5 * ln_te
        high = COULOMB_HIGH_CONST - 0.5 * ln_ne + ln_te
    return np.where(te < COULOMB_BRANCH_EV * Z * Z, low, high)


def electron_ion_collision_frequency(ne: ArrayLike, Te: ArrayLike, coulomb_log: ArrayLike) -> np.ndarray:
    """Electron collision rate nu_e = 2.91e-6 ne lnLambda Te^-3/2 s^-1 (ne in cm^-3), 1/s.

    The NRL Plasma Formulary's electron collision rate (Braginskii's 1/tau_e);
    this function takes ne in m^-3 and Te in eV. Checked against PlasmaPy's
    ``MaxwellianCollisionFrequencies.Maxwellian_avg_ei_collision_freq`` given
    the same Coulomb logarithm.
    """
    ne_a = np.asarray(ne, dtype=np.float64)
    te = np.asarray(Te, dtype=np.float64)
    with np.errstate(all="ignore"):
        return NU_EI_COEFFICIENT * ne_a * np.asarray(coulomb_log, dtype=np.float64) / (te * np.sqrt(te))


def electron_neutral_collision_frequency(n0: ArrayLike, Te: ArrayLike, sigma_en: float) -> np.ndarray:
    """nu_en = n0 sigma_en <v>, <v> = sqrt(8 k Te / (pi me)) the Maxwellian mean speed, 1/s.

    n0 in m^-3, Te in eV, sigma_en in m^2 (a constant momentum-transfer cross
    section; 1e-19 m^2 by default, an order-of-magnitude value of common practice).
    """
    return np.asarray(n0, dtype=np.float64) * sigma_en * MEAN_FACTOR * thermal_speed(Te)
