"""Physical constants (CODATA 2022, SI) hard-coded so the hot path never imports scipy."""

from __future__ import annotations

import math

__all__ = [
    "ELEMENTARY_CHARGE", "BOLTZMANN", "EPSILON_0", "MU_0", "ELECTRON_MASS", "PROTON_MASS",
    "ATOMIC_MASS", "SPEED_OF_LIGHT", "PLANCK", "REDUCED_PLANCK", "EV_IN_K", "K_IN_EV", "ELECTRON_REST_ENERGY_EV", "PI",
]

# CODATA 2022 recommended values, the set that scipy.constants (>= 1.15) and
# astropy carry; tests/physics/test_physics_constants.py checks every one
# against scipy.constants. e, k and c are exact by the 2019 SI definitions.
ELEMENTARY_CHARGE = 1.602176634e-19      # C (exact)
BOLTZMANN = 1.380649e-23                 # J/K (exact)
SPEED_OF_LIGHT = 299792458.0             # m/s (exact)
PLANCK = 6.62607015e-34                  # J s (exact)
REDUCED_PLANCK = PLANCK / (2.0 * math.pi)  # J s (exact up to rounding)
EPSILON_0 = 8.8541878188e-12             # F/m
MU_0 = 1.25663706127e-6                  # N/A^2
ELECTRON_MASS = 9.1093837139e-31         # kg
PROTON_MASS = 1.67262192595e-27          # kg
ATOMIC_MASS = 1.66053906892e-27          # kg (u, the atomic mass constant)

PI = math.pi
EV_IN_K = ELEMENTARY_CHARGE / BOLTZMANN                  # 1 eV = 11604.518... K
K_IN_EV = BOLTZMANN / ELEMENTARY_CHARGE                  # 1 K = 8.617...e-5 eV
ELECTRON_REST_ENERGY_EV = ELECTRON_MASS * SPEED_OF_LIGHT**2 / ELEMENTARY_CHARGE  # 510998.95 eV
