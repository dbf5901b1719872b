"""Input validation for derive(): per-sample invalid reasons, and device constants folded once per Device."""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Mapping

import numpy as np

from monitor.model import Device
from monitor.physics import constants as C
from monitor.physics.collisions import COULOMB_BRANCH_EV, COULOMB_HIGH_CONST, COULOMB_LOW_CONST

__all__ = ["DeviceConsts", "device_consts", "validate_scalar", "validate_vector", "ABSURD"]

# Above these the inputs are absurd for any laboratory plasma (issue 2, section 5).
ABSURD: dict[str, float] = {"ne": 1e33, "Te": 1e7, "Ti": 1e7}


@dataclass(frozen=True)
class DeviceConsts:
    """Scalars derived once from a Device; NaN where the device value is invalid."""

    length: float | None
    frequency: float | None
    gas_temperature: float
    sigma_en: float
    cutoff_density: float | None
    wpi_factor: float       # omega_pi / omega_pe = sqrt(Z me / m_i)
    wci_factor: float       # omega_ci / |B| = Z e / m_i
    vti_factor: float       # v_Ti / sqrt(Ti) = sqrt(e / m_i)
    mass_ratio: float       # me / m_i
    inv_z: float
    ln_z: float
    coulomb_low: float      # 23 + 3 ln 10 - ln Z
    coulomb_high: float     # 24 + 3 ln 10
    coulomb_branch: float   # 10 Z^2 eV
    n0_factor: float        # 1 / (k Tgas)
    invalid: tuple[str, ...]


def _positive(value: float | None, name: str, bad: list[str], allow_zero: bool = False) -> float:
    v = math.nan if value is None else float(value)
    if not math.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        bad.append(f"{name}_invalid")
        return math.nan
    return v


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
        nc = None
        if freq is not None:
            w = 2.0 * np.pi * np.float64(freq)
            nc = float(C.EPSILON_0 * C.ELECTRON_MASS * w * w / C.ELEMENTARY_CHARGE**2)
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
    """Inputs with meaningless samples set to NaN (copies only when needed) and the reason masks."""
    x: dict[str, Any] = dict(cols)
    invalid: dict[str, np.ndarray] = {}
    for key, limit in ABSURD.items():
        c = x.get(key)
        if c is None:
            continue
        ok = (c > 0.0) & (c <= limit)
        if not ok.all():
            fin = np.isfinite(c)
            _mark(invalid, f"{key}_not_finite", ~fin)
            _mark(invalid, f"{key}_not_positive", fin & (c <= 0.0))
            _mark(invalid, f"{key}_absurd", fin & (c > limit))
            x[key] = np.where(ok, c, np.nan)
    b = x.get("B")
    if b is not None:
        ok = np.isfinite(b)
        if not ok.all():
            invalid["B_not_finite"] = ~ok
            x["B"] = np.where(ok, b, np.nan)
    p = x.get("p0")
    if p is not None:
        ok = (p >= 0.0) & (p < np.inf)
        if not ok.all():
            fin = np.isfinite(p)
            _mark(invalid, "p0_not_finite", ~fin)
            _mark(invalid, "p0_negative", fin & (p < 0.0))
            x["p0"] = np.where(ok, p, np.nan)
    return x, invalid
