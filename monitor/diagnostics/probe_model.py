"""Our forward model of Langmuir probe sweeps (single and double probe), with reproducible noise, for the simulator and tests."""

from __future__ import annotations

import math

import numpy as np

from monitor.diagnostics.probe_single import BOHM_FACTOR
from monitor.diagnostics.probe_spec import ProbeSpec
from monitor.physics.constants import ELECTRON_MASS, ELEMENTARY_CHARGE, PI

__all__ = ["single_probe_current", "double_probe_current", "noisy", "bias_grid", "scenario_plasma", "scenario_sweeps",
           "SCENARIO_PROBE", "SCENARIO_PERIOD"]


def _erfcx(x: np.ndarray) -> np.ndarray:
    from scipy.special import erfcx

    return np.asarray(erfcx(x), dtype=np.float64)


def single_probe_current(V: np.ndarray, ne: np.ndarray | float, Te: np.ndarray | float, Vp: np.ndarray | float,
                         spec: ProbeSpec, *, model: str = "oml", sheath_slope: float = 0.0) -> np.ndarray:
    """Probe current (A, electron collection positive) at bias V (V) for rows of (ne m^-3, Te eV, Vp V).

    Electrons (Maxwellian, thermal current I_e0 = e n A sqrt(e Te / 2 pi m_e)):
    I_e0 exp((V - Vp)/Te) below Vp (Hutchinson ch. 3); above Vp, ``model="oml"``
    gives the orbital-motion-limited cylinder I_e0 [2 sqrt(eta/pi) + exp(eta) erfc(sqrt(eta))],
    eta = (V - Vp)/Te (Hutchinson ch. 3; Merlino 2007), ``"thin_sheath"`` a flat I_e0.
    Ions (cold, Z from spec, n_i = n_e / Z): OML cylinder I_i = Z e n_i A (sqrt 2 / pi) sqrt(Z e (Vp - V)/m_i);
    thin sheath the Bohm current exp(-1/2) Z e n_i A c_s times (1 + sheath_slope (Vp - V)/Te).
    Arrays broadcast: V (S, N) with ne, Te, Vp of shape (S, 1) or scalars.
    """
    e, A, Z, mi = ELEMENTARY_CHARGE, spec.collecting_area, spec.ion_charge, spec.ion_mass
    ne_, te_, vp_ = (np.asarray(x, dtype=np.float64) for x in (ne, Te, Vp))
    ie0 = e * ne_ * A * np.sqrt(e * te_ / (2.0 * PI * ELECTRON_MASS))
    eta = (V - vp_) / te_
    pos = np.maximum(eta, 0.0)
    if model == "oml":
        above = ie0 * (2.0 * np.sqrt(pos / PI) + _erfcx(np.sqrt(pos)))
    elif model == "thin_sheath":
        above = ie0 * np.ones_like(pos)
    else:
        raise ValueError(f"unknown model {model!r}")
    ielec = np.where(eta < 0, ie0 * np.exp(np.minimum(eta, 0.0)), above)
    ni = ne_ / Z
    if model == "oml":
        iion = Z * e * ni * A * (math.sqrt(2.0) / PI) * np.sqrt(Z * e * np.maximum(vp_ - V, 0.0) / mi)
    else:
        cs = np.sqrt(Z * e * te_ / mi)
        iion = BOHM_FACTOR * Z * e * ni * A * cs * (1.0 + sheath_slope * np.maximum(vp_ - V, 0.0) / te_)
    return np.asarray(ielec - iion, dtype=np.float64)


def double_probe_current(V: np.ndarray, ne: np.ndarray | float, Te: np.ndarray | float, spec: ProbeSpec,
                         *, slope: float = 0.0) -> np.ndarray:
    """Symmetric double probe: I = I_sat tanh(V / 2 Te) + slope V, with I_sat the Bohm current of one tip
    exp(-1/2) Z e n_i A c_s (Hutchinson ch. 3, the double probe; Merlino 2007 for the Bohm current)."""
    e, A, Z, mi = ELEMENTARY_CHARGE, spec.collecting_area, spec.ion_charge, spec.ion_mass
    te_ = np.asarray(Te, dtype=np.float64)
    isat = BOHM_FACTOR * Z * e * (np.asarray(ne, dtype=np.float64) / Z) * A * np.sqrt(Z * e * te_ / mi)
    return np.asarray(isat * np.tanh(V / (2.0 * te_)) + slope * V, dtype=np.float64)


def noisy(I: np.ndarray, rel: float, floor: np.ndarray | float, seed: int | list[int]) -> np.ndarray:
    """I plus Gaussian noise of standard deviation rel |I| + floor (A), reproducible from ``seed``."""
    z = np.random.default_rng(seed).standard_normal(I.shape)
    return np.asarray(I + (rel * np.abs(I) + np.asarray(floor)) * z, dtype=np.float64)


def bias_grid(vp: np.ndarray | float, te: np.ndarray | float, n: int, below: float = 15.0,
              above: float = 5.0) -> np.ndarray:
    """Bias rows from Vp - below*Te to Vp + above*Te, n points each (S, n)."""
    vp_ = np.atleast_1d(np.asarray(vp, dtype=np.float64))[:, None]
    te_ = np.atleast_1d(np.asarray(te, dtype=np.float64))[:, None]
    u = np.linspace(-below, above, n)[None, :]
    return np.asarray(vp_ + te_ * u, dtype=np.float64)


# ----------------------------------------------------------------------------- the sim:probe scenario

SCENARIO_PERIOD = 60.0        # s: the plasma's slow cycle
SCENARIO_PROBE = ProbeSpec(geometry="cylinder", radius=5e-5, length=5e-3)   # thin enough for OML throughout
_NOISE_BLOCK = 64


def scenario_plasma(t: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Our invented discharge seen by the probe at times t (s): ne (m^-3), Te (eV), Vp (V).

    A 60 s cycle: density breathing between 3e15 and 3e16 m^-3 (geometric),
    Te between 2 and 5 eV against it, plasma potential 8 V + 2 Te.
    """
    phase = 2.0 * PI * (np.asarray(t, dtype=np.float64) % SCENARIO_PERIOD) / SCENARIO_PERIOD
    ne = 1e16 * np.exp(1.15 * np.sin(phase))
    te = 3.5 - 1.5 * np.sin(phase + 0.4)
    return ne, te, 8.0 + 2.0 * te


def scenario_sweeps(k0: int, k1: int, *, spec: ProbeSpec, seed: int = 0, points: int = 250,
                    rate: float = 20.0, noise: float = 0.01) -> tuple[np.ndarray, np.ndarray, np.ndarray,
                                                                       np.ndarray]:
    """Sweeps k0 .. k1-1 of the scenario: (ids, t at each sweep's middle, V, I), rows S x points.

    Sweep k runs over [k/rate, (k+1)/rate); the bias goes from -40 V to +30 V;
    the current is our OML cylinder model plus noise of ``noise`` |I| + ``noise``
    I_sat (Gaussian), drawn per sweep number so any chunking gives the same numbers.
    """
    k = np.arange(k0, max(k0, k1), dtype=np.int64)
    t = (k + 0.5) / rate
    ne, te, vp = scenario_plasma(t)
    V = np.tile(np.linspace(-40.0, 30.0, points), (len(k), 1))
    I0 = single_probe_current(V, ne[:, None], te[:, None], vp[:, None], spec)
    floor = noise * np.abs(I0[:, :1])
    z = np.empty_like(I0)
    for b in np.unique(k // _NOISE_BLOCK):         # one generator per block of 64 sweeps
        sel = (k // _NOISE_BLOCK) == b
        rows = np.random.default_rng([seed, int(b)]).standard_normal((_NOISE_BLOCK, points))
        z[sel] = rows[k[sel] % _NOISE_BLOCK]
    return k, t, V, I0 + (noise * np.abs(I0) + floor) * z
