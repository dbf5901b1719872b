"""Double Langmuir probe analysis of many sweeps at once: I = I_sat tanh(V / 2 Te) + g V + c by vectorised Gauss-Newton.

For two equal tips floating together, the current between them is
I = I_sat tanh(e V / 2 k Te) (Hutchinson, *Principles of Plasma Diagnostics*,
2nd ed., ch. 3 on double probes; Merlino 2007 for the Bohm ion current
each tip saturates at). A linear term g V models sheath expansion and c an
offset (stray current, slightly unequal tips). All sweeps are fitted
together: the Jacobian is built for the whole (sweeps x points) array and the
4 x 4 normal equations of every sweep are solved in one batched call, with a
small Levenberg damping, for a fixed handful of iterations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from monitor.diagnostics.probe_fits import line_fit
from monitor.diagnostics.probe_spec import ProbeSpec
from monitor.diagnostics.probe_single import BOHM_FACTOR
from monitor.physics.constants import ELEMENTARY_CHARGE

__all__ = ["DoubleFit", "analyse_double", "double_model"]

ITERATIONS = 12
DAMPING = 1e-3


@dataclass(frozen=True, eq=False)
class DoubleFit:
    """Per-sweep double-probe results (arrays of length S): parameters, sigmas, chi2/dof and a failure token."""

    I_sat: np.ndarray
    Te: np.ndarray
    slope: np.ndarray
    offset: np.ndarray
    sigma_I_sat: np.ndarray
    sigma_Te: np.ndarray
    ni: np.ndarray
    sigma_ni: np.ndarray
    chi2_red: np.ndarray
    fail: np.ndarray


def double_model(V: np.ndarray, isat: np.ndarray, te: np.ndarray, g: np.ndarray, c: np.ndarray) -> np.ndarray:
    """I = I_sat tanh(V / 2 Te) + g V + c, parameters per row (S,), V (S, N)."""
    return np.asarray(isat[:, None] * np.tanh(V / (2.0 * te[:, None])) + g[:, None] * V + c[:, None])


def _start(V: np.ndarray, I: np.ndarray) -> tuple[np.ndarray, ...]:
    ones = np.ones_like(V)
    vmax, vmin = V.max(axis=1, keepdims=True), V.min(axis=1, keepdims=True)
    right = line_fit(V, I, ones, V >= 0.5 * vmax)
    left = line_fit(V, I, ones, V <= 0.5 * vmin)
    span = np.minimum(vmax, -vmin)
    mid = line_fit(V, I, ones, np.abs(V) <= 0.15 * span)
    g = 0.5 * (right.b + left.b)
    i_right, i_left = right.at(np.zeros(len(V))), left.at(np.zeros(len(V)))
    isat = 0.5 * (i_right - i_left)
    c = 0.5 * (i_right + i_left)
    with np.errstate(invalid="ignore", divide="ignore"):
        te = isat / (2.0 * (mid.b - g))
    te = np.where(np.isfinite(te) & (te > 0), te, 0.1 * span[:, 0])
    return isat, te, g, c


def _normal(cols: tuple[np.ndarray, ...], r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """J^T J (S, 4, 4) and J^T r (S, 4) from the Jacobian's columns, one row-wise dot product per entry."""
    S = r.shape[0]
    jtj = np.empty((S, 4, 4))
    jtr = np.empty((S, 4))
    for i in range(4):
        jtr[:, i] = np.einsum("sn,sn->s", cols[i], r)
        for j in range(i, 4):
            jtj[:, i, j] = jtj[:, j, i] = np.einsum("sn,sn->s", cols[i], cols[j])
    return jtj, jtr


def _inverse(m: np.ndarray) -> np.ndarray:
    """Batched inverse after scaling to unit diagonal (the columns differ by many decades); NaN where singular."""
    d = np.sqrt(np.abs(np.einsum("sii->si", m)))
    d = np.where(d > 0, d, 1.0)
    scaled = m / (d[:, :, None] * d[:, None, :])
    out = np.full_like(m, np.nan)
    ok = np.isfinite(scaled).all(axis=(1, 2)) & (np.abs(np.linalg.det(scaled)) > 1e-13)
    if ok.any():
        out[ok] = np.linalg.inv(scaled[ok]) / (d[ok, :, None] * d[ok, None, :])
    return out


def _solve(m: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Batched m^-1 rhs (zero step where m is singular)."""
    step = np.einsum("sij,sj->si", _inverse(m), rhs)
    return np.where(np.isfinite(step), step, 0.0)


def analyse_double(V: np.ndarray, I: np.ndarray, spec: ProbeSpec) -> DoubleFit:
    """Fit every row of V, I (S x N, bias ascending through 0, screened). Damped Gauss-Newton from a
    closed-form start (outer lines give g, c and I_sat; the central slope gives Te)."""
    S, N = I.shape
    p = np.stack(_start(V, I), axis=1)               # (S, 4): I_sat, Te, g, c
    jtj = np.zeros((S, 4, 4))
    for _ in range(ITERATIONS):
        isat, te = p[:, 0:1], p[:, 1:2]
        th = np.tanh(V / (2.0 * te))
        cols = (th, -isat * (1.0 - th * th) * V / (2.0 * te * te), V, np.ones_like(V))
        r = I - (isat * th + p[:, 2:3] * V + p[:, 3:4])
        jtj, jtr = _normal(cols, r)
        step = _solve(jtj * (1.0 + DAMPING * np.eye(4))[None, :, :], jtr)
        new = p + step
        shrink = ~(new[:, 1] > 0.2 * p[:, 1])          # keep Te positive: at most a fivefold fall per step
        new[shrink] = p[shrink] + 0.5 * step[shrink]
        new[shrink, 1] = np.maximum(new[shrink, 1], 0.2 * p[shrink, 1])
        p = np.where(np.isfinite(new), new, p)
    isat, te = p[:, 0], p[:, 1]
    resid = I - double_model(V, isat, te, p[:, 2], p[:, 3])
    chi2 = (resid * resid).sum(axis=1)
    s2 = chi2 / max(N - 4, 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        cov = _inverse(jtj) * s2[:, None, None]
        noise2 = np.mean(np.diff(resid, axis=1) ** 2, axis=1) / 2.0     # successive-difference noise estimate
        chi2_red = s2 / noise2
    sig_isat = np.sqrt(np.abs(cov[:, 0, 0]))
    sig_te = np.sqrt(np.abs(cov[:, 1, 1]))
    e, Z, A = ELEMENTARY_CHARGE, spec.ion_charge, spec.collecting_area
    with np.errstate(invalid="ignore", divide="ignore"):
        cs = np.sqrt(Z * e * te / spec.ion_mass)
        ni = isat / (BOHM_FACTOR * Z * e * A * cs)
        # ln ni = ln I_sat - ln Te / 2 + const, with the fit's I_sat-Te covariance
        var_ln = (sig_isat / isat) ** 2 + (0.5 * sig_te / te) ** 2 - cov[:, 0, 1] / (isat * te)
        sigma_ni = ni * np.sqrt(np.maximum(var_ln, 0.0))
    fail = np.full(S, "", dtype=object)
    fail[~(np.isfinite(te) & (te > 0) & np.isfinite(isat) & (isat > 0))] = "fit_failed"
    # the tanh must be resolved: I_sat well above its sigma, Te between the bias step and a quarter
    # of the sweep's span (else the knee is a step or a straight line), Te to 50 %
    step = np.abs(np.diff(V, axis=1)).max(axis=1)
    span = V.max(axis=1) - V.min(axis=1)
    with np.errstate(invalid="ignore"):
        resolved = (isat > 5.0 * sig_isat) & (te > step) & (te < 0.25 * span) & (sig_te <= 0.5 * te)
    fail[~resolved & (fail == "")] = "uncertain_fit"
    return DoubleFit(I_sat=isat, Te=te, slope=p[:, 2], offset=p[:, 3], sigma_I_sat=sig_isat, sigma_Te=sig_te,
                     ni=ni, sigma_ni=sigma_ni, chi2_red=chi2_red, fail=fail)
