"""The electron energy distribution of single-probe sweeps by the Druyvesteyn second derivative, vectorised."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from monitor.diagnostics.probe_fits import savgol_weights
from monitor.diagnostics.probe_single import window_for
from monitor.diagnostics.probe_spec import ProbeSpec
from monitor.physics.constants import ELECTRON_MASS, ELEMENTARY_CHARGE

__all__ = ["Eedf", "druyvesteyn"]


@dataclass(frozen=True, eq=False)
class Eedf:
    """Per sweep (rows): ``energy`` (eV, = Vp - V, NaN at and above Vp and in the smoothing edges),
    ``g`` the distribution (m^-3 eV^-1), its integral ``density`` (m^-3), ``mean_energy`` (eV), and the
    ``window`` (points) of the order-2 Savitzky-Golay second derivative used."""

    energy: np.ndarray
    g: np.ndarray
    density: np.ndarray
    mean_energy: np.ndarray
    window: int


def druyvesteyn(V: np.ndarray, I: np.ndarray, vp: np.ndarray, spec: ProbeSpec, window: int | None = None) -> Eedf:
    """g(eps) = (2 m_e / (e^2 A)) sqrt(2 e eps / m_e) d^2 I / dV^2 at eps = Vp - V > 0 (V in volts, eps in eV).

    Druyvesteyn's relation for any convex probe in the retarding region
    (Hutchinson, *Principles of Plasma Diagnostics*, 2nd ed., ch. 3, on the
    distribution function): the ion line's second derivative vanishes, so the measured current is
    differentiated directly. Smoothing: Savitzky-Golay of order 2 over
    ``window`` points (default twice the analysis window, so the second
    derivative's noise stays bounded); the distribution is blurred over
    that width in energy. For a Maxwellian, the integral is n_e and the mean
    energy 1.5 Te. V, I: (S, N) rows with ascending bias; vp (S,) from the analysis.
    """
    S, N = I.shape
    w = window if window is not None else min(2 * window_for(N, spec) + 1, N // 3 | 1)
    half = w // 2
    d2 = np.full(I.shape, np.nan)
    if N >= w:
        from numpy.lib.stride_tricks import sliding_window_view

        step = (V[:, w - 1:] - V[:, :N - w + 1]) / (w - 1)
        d2[:, half:N - half] = (sliding_window_view(I, w, axis=1) @ savgol_weights(w, 2, 2)) / step ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        eps = vp[:, None] - V
        ok = (eps > 0) & np.isfinite(d2)
        energy = np.where(ok, eps, np.nan)
        g = np.where(ok, (2.0 * ELECTRON_MASS / (ELEMENTARY_CHARGE ** 2 * spec.collecting_area))
                     * np.sqrt(2.0 * ELEMENTARY_CHARGE * np.where(ok, eps, 0.0) / ELECTRON_MASS) * d2, np.nan)
        # trapezoid integrals over the valid points of each row (bias ascending: energy descending)
        gz, ez = np.where(ok, g, 0.0), np.where(ok, eps, 0.0)
        pair = ok[:, 1:] & ok[:, :-1]
        de = np.where(pair, ez[:, :-1] - ez[:, 1:], 0.0)
        density = (0.5 * (gz[:, 1:] + gz[:, :-1]) * de).sum(axis=1)
        first = (0.5 * (gz[:, 1:] * ez[:, 1:] + gz[:, :-1] * ez[:, :-1]) * de).sum(axis=1)
        mean = first / density
    return Eedf(energy=energy, g=g, density=density, mean_energy=mean, window=w)
