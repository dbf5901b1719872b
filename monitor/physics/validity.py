"""Input validation and regime validity for derive(): invalid reasons, where formulas stop holding, device constants."""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Mapping

import numpy as np
from numpy.typing import ArrayLike

from monitor.model import Device
from monitor.physics import constants as C
from monitor.physics.collisions import COULOMB_BRANCH_EV, COULOMB_HIGH_CONST, COULOMB_LOW_CONST
from monitor.physics.ranges import RANGES

__all__ = ["DeviceConsts", "device_consts", "validate_scalar", "validate_vector", "ABSURD",
           "coupling_parameter", "fermi_energy", "relativistic_fraction",
           "STRONG_COUPLING_ND", "DEGENERATE_ND2_PER_NE", "ION_COUPLING_PER_NE", "RELATIVISTIC_EV",
           "SPEED_OF_LIGHT_EV", "cutoff_density_of"]

# Above these the inputs are absurd for any plasma (the upper bounds of monitor.physics.ranges).
ABSURD: dict[str, float] = {k: RANGES[k].high for k in ("ne", "Te", "Ti")}

# --- Where the formulas stop holding (the flags derive() raises per sample) -------------------
# Coupling parameter Gamma = Z^2 e^2 / (4 pi eps0 a k T), a = (3 / (4 pi n))^(1/3) the
# Wigner-Seitz radius (Ichimaru, Rev. Mod. Phys. 54, 1017 (1982); PlasmaPy's
# ``coupling_parameter``, method "classical", as the independent reference). With T in eV,
# Gamma^3 = Z^6 (e / (4 pi eps0 T))^3 (4 pi n / 3).
_K_COUPLING3 = (C.ELEMENTARY_CHARGE / (4.0 * math.pi * C.EPSILON_0)) ** 3 * (4.0 * math.pi / 3.0)
# For electrons (Z = 1, n = ne) Gamma_e = 1 / (3 N_D^(2/3)) exactly (N_D = 4/3 pi ne lambda_D^3),
# so Gamma_e >= 1 is N_D <= 3^(-3/2): one comparison on a value derive() already has.
STRONG_COUPLING_ND = 3.0 ** -1.5
# Ions of charge Z at n_i = ne / Z: Gamma_i^3 = Z^5 K ne / Ti^3 (per unit Z: see DeviceConsts).
ION_COUPLING_PER_NE = _K_COUPLING3
# Electron Fermi energy E_F = hbar^2 (3 pi^2 ne)^(2/3) / (2 me) (Kittel, Introduction to Solid
# State Physics, ch. 6; PlasmaPy's ``Fermi_energy``), in eV: E_F = K_F ne^(2/3).
_K_FERMI = C.REDUCED_PLANCK**2 * (3.0 * math.pi**2) ** (2.0 / 3.0) / (2.0 * C.ELECTRON_MASS * C.ELEMENTARY_CHARGE)
# N_D = K_D Te^(3/2) ne^(-1/2), so Te < E_F  <=>  N_D^2 < K_D^2 K_F^3 ne (no cube roots on the hot path).
_K_DEBYE_NUMBER = 4.0 / 3.0 * math.pi * (C.EPSILON_0 / C.ELEMENTARY_CHARGE) ** 1.5
DEGENERATE_ND2_PER_NE = _K_DEBYE_NUMBER**2 * _K_FERMI**3
# Relativistic electrons: k Te / (me c^2) >= 1 % (corrections to the Maxwellian mean energy and
# the cyclotron frequency are of order k Te / me c^2; NRL Plasma Formulary's relativistic
# section, Chen's textbook ch. 1 on thermal speeds): ~5.11 keV.
RELATIVISTIC_EV = 0.01 * C.ELECTRON_REST_ENERGY_EV
# The non-relativistic rms speed sqrt(3 k Te / me) reaches c at k Te = me c^2 / 3 (~170 keV):
# from there on every Maxwellian speed formula of ours is withheld (NaN) rather than printed above c.
SPEED_OF_LIGHT_EV = C.ELECTRON_REST_ENERGY_EV / 3.0


def coupling_parameter(n: ArrayLike, T: ArrayLike, Z: float = 1.0) -> np.ndarray:
    """Classical coupling parameter Gamma = Z^2 e^2 / (4 pi eps0 a k T), dimensionless.

    ``n`` the density of the species (m^-3; ions: ne / Z), ``T`` its temperature
    (eV), ``a = (3 / (4 pi n))^(1/3)`` the Wigner-Seitz radius. Gamma >= 1 is
    strongly coupled (Ichimaru 1982); checked against PlasmaPy's ``coupling_parameter``.
    """
    with np.errstate(all="ignore"):
        n_a = np.asarray(n, dtype=np.float64)
        a = np.cbrt(3.0 / (4.0 * math.pi * n_a))
        return Z * Z * C.ELEMENTARY_CHARGE / (4.0 * math.pi * C.EPSILON_0 * a * np.asarray(T, dtype=np.float64))


def fermi_energy(ne: ArrayLike) -> np.ndarray:
    """Electron Fermi energy E_F = hbar^2 (3 pi^2 ne)^(2/3) / (2 me), in eV (ne in m^-3).

    Electrons are degenerate where Te < E_F (Kittel ch. 6); checked against
    PlasmaPy's ``Fermi_energy``.
    """
    with np.errstate(all="ignore"):
        return _K_FERMI * np.cbrt(np.asarray(ne, dtype=np.float64)) ** 2


def relativistic_fraction(Te: ArrayLike) -> np.ndarray:
    """k Te / (me c^2), dimensionless (Te in eV); derive() flags >= 0.01 as relativistic."""
    return np.asarray(Te, dtype=np.float64) / C.ELECTRON_REST_ENERGY_EV


@dataclass(frozen=True)
class DeviceConsts:
    """Scalars derived once from a Device; NaN where the device value is invalid."""

    # The five below are arrays (one value per draw) only in a Monte Carlo (monitor.physics.montecarlo).
    length: float | np.ndarray | None
    frequency: float | np.ndarray | None
    gas_temperature: float | np.ndarray
    sigma_en: float | np.ndarray
    cutoff_density: float | np.ndarray | None
    wpi_factor: float       # omega_pi / omega_pe = sqrt(Z me / m_i)
    wci_factor: float       # omega_ci / |B| = Z e / m_i
    vti_factor: float       # v_Ti / sqrt(Ti) = sqrt(e / m_i)
    mass_ratio: float       # me / m_i
    inv_z: float
    ln_z: float
    coulomb_low: float      # 23 + 3 ln 10 - ln Z
    coulomb_high: float     # 24 + 3 ln 10
    coulomb_branch: float   # 10 Z^2 eV
    n0_factor: float | np.ndarray        # 1 / (k Tgas)
    ion_coupling_per_ne: float  # Gamma_i^3 Ti^3 / ne = Z^5 K (ions at ne / Z)
    invalid: tuple[str, ...]


def _positive(value: float | None, name: str, bad: list[str], allow_zero: bool = False) -> float:
    v = math.nan if value is None else float(value)
    if not math.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        bad.append(f"{name}_invalid")
        return math.nan
    return v


def cutoff_density_of(f: float | np.ndarray) -> float | np.ndarray:
    """Critical density eps0 me (2 pi f)^2 / e^2 (m^-3) of an ordinary wave frequency f (Hz)."""
    w = 2.0 * np.pi * f
    return C.EPSILON_0 * C.ELECTRON_MASS * w * w / C.ELEMENTARY_CHARGE**2


@lru_cache(maxsize=64)
def device_consts(device: Device) -> DeviceConsts:
    """Fold a Device into the scalars the hot path multiplies by (never raises: IEEE arithmetic)."""
    bad: list[str] = []
    length = None if device.length is None else _positive(device.length, "L", bad)
    freq = None if device.wave_frequency is None else _positive(device.wave_frequency, "f", bad)
    with np.errstate(all="ignore"):
        a = np.float64(_positive(device.ion_mass_u, "A", bad))
        z = np.float64(_positive(device.ion_charge, "Z", bad))
        tgas = np.float64(_positive(device.gas_temperature, "Tgas", bad))
        sigma_en = _positive(device.sigma_en, "sigma_en", bad, allow_zero=True)
        mi = a * C.ATOMIC_MASS
        nc = None if freq is None else float(cutoff_density_of(np.float64(freq)))
        ln_z = np.log(z)
        return DeviceConsts(
            length=length, frequency=freq, gas_temperature=float(tgas), sigma_en=sigma_en, cutoff_density=nc,
            wpi_factor=float(np.sqrt(z * C.ELECTRON_MASS / mi)),
            wci_factor=float(z * C.ELEMENTARY_CHARGE / mi),
            vti_factor=float(np.sqrt(C.ELEMENTARY_CHARGE / mi)),
            mass_ratio=float(C.ELECTRON_MASS / mi),
            inv_z=float(1.0 / z), ln_z=float(ln_z),
            coulomb_low=float(COULOMB_LOW_CONST - ln_z), coulomb_high=COULOMB_HIGH_CONST,
            coulomb_branch=float(COULOMB_BRANCH_EV * z * z),
            n0_factor=float(1.0 / (C.BOLTZMANN * tgas)),
            ion_coupling_per_ne=float(z**5 * ION_COUPLING_PER_NE),
            invalid=tuple(bad),
        )


def validate_scalar(x: dict[str, float]) -> list[str]:
    """Replace meaningless inputs in ``x`` (floats) by NaN in place; return the reasons."""
    reasons: list[str] = []
    for key, limit in ABSURD.items():
        v = x.get(key)
        if v is not None and not (0.0 < v <= limit):
            reasons.append(f"{key}_not_finite" if not math.isfinite(v)
                           else f"{key}_not_positive" if v <= 0 else f"{key}_absurd")
            x[key] = math.nan
    b = x.get("B")
    if b is not None and not math.isfinite(b):
        reasons.append("B_not_finite")
        x["B"] = math.nan
    p = x.get("p0")
    if p is not None and not (0.0 <= p < math.inf):
        reasons.append("p0_not_finite" if not math.isfinite(p) else "p0_negative")
        x["p0"] = math.nan
    return reasons


def _mark(invalid: dict[str, np.ndarray], reason: str, mask: np.ndarray) -> None:
    if mask.any():
        invalid[reason] = mask


def validate_vector(cols: Mapping[str, np.ndarray], n: int) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Inputs with meaningless samples set to NaN (copies only when needed) and the reason masks.

    Each key is first tested with its minimum and maximum (two reductions; a NaN anywhere fails
    the test), and only a batch that fails is checked sample by sample.
    """
    x: dict[str, Any] = dict(cols)
    invalid: dict[str, np.ndarray] = {}
    for key, limit in ABSURD.items():
        c = x.get(key)
        if c is None or not len(c) or (c.min() > 0.0 and c.max() <= limit):   # NaN fails the test
            continue
        ok = (c > 0.0) & (c <= limit)
        if not ok.all():
            fin = np.isfinite(c)
            _mark(invalid, f"{key}_not_finite", ~fin)
            _mark(invalid, f"{key}_not_positive", fin & (c <= 0.0))
            _mark(invalid, f"{key}_absurd", fin & (c > limit))
            x[key] = np.where(ok, c, np.nan)
    b = x.get("B")
    if b is not None and len(b) and not (math.isfinite(float(b.min())) and math.isfinite(float(b.max()))):
        ok = np.isfinite(b)
        if not ok.all():
            invalid["B_not_finite"] = ~ok
            x["B"] = np.where(ok, b, np.nan)
    p = x.get("p0")
    if p is not None and len(p) and not (p.min() >= 0.0 and p.max() < np.inf):
        ok = (p >= 0.0) & (p < np.inf)
        if not ok.all():
            fin = np.isfinite(p)
            _mark(invalid, "p0_not_finite", ~fin)
            _mark(invalid, "p0_negative", fin & (p < 0.0))
            x["p0"] = np.where(ok, p, np.nan)
    return x, invalid
