"""Single Langmuir probe analysis of many sweeps at once: Vf, ion fit, Te, Vp, ne, ni with standard uncertainties.

The method is the textbook one (I. H. Hutchinson, *Principles of Plasma
Diagnostics*, 2nd ed., Cambridge 2002, ch. 3 "Electric probes"; R. L.
Merlino, "Understanding Langmuir probe current-voltage characteristics",
Am. J. Phys. 75, 1078 (2007)), done on whole (sweeps x points) arrays:

1. smooth I with a Savitzky-Golay filter and take dI/dV the same way;
2. plasma potential Vp at the peak of the smoothed dI/dV (parabolic vertex);
3. floating potential Vf at the last upward zero crossing of the smoothed
   current below Vp, interpolated linearly;
4. ion branch (V <= Vf - 2.5 Te) fitted with a straight line (slope kept
   for sheath expansion); electron current Ie = I - ion line;
5. Te = 1 / slope of a weighted fit of ln Ie over the retarding region
   Vf + Te/2 <= V <= Vp - Te/2 (steps 4-5 iterate twice from the first
   estimate Te0 = Ie(Vp) / max dI/dV);
6. ne from the electron saturation current at Vp,
   I_es = e n_e A sqrt(e Te / (2 pi m_e))   (Hutchinson ch. 3; Merlino 2007);
7. ni by the Bohm (thin sheath) law I_sat = exp(-1/2) Z e n_i A c_s with
   c_s = sqrt(Z e Te / m_i) (exp(-1/2) = 0.61 from memory, Hutchinson ch. 3), or for a
   thin cylinder (r_p < lambda_D) the orbital-motion-limited law
   I_i = Z e n_i A (sqrt(2) / pi) sqrt(Z e (Vp - V) / m_i) through the slope of
   I_i^2 against V (Hutchinson ch. 3; Merlino 2007).

Noise is measured per sweep from the smoothing residual as a floor plus a
part proportional to the current; it weights the fits and, through their
covariance (scaled by chi2/dof when that exceeds 1), gives the sigmas.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from monitor.diagnostics.probe_fits import Columns, LineFit, last_upward_crossing, line_fit, savgol_weights, smooth_pair, take
from monitor.diagnostics.probe_spec import ProbeSpec
from monitor.physics.constants import ELECTRON_MASS, ELEMENTARY_CHARGE, EPSILON_0, PI

__all__ = ["SingleFit", "analyse_single", "window_for", "BOHM_FACTOR", "OML_MAX_RATIO", "electron_saturation_density"]

BOHM_FACTOR = math.exp(-0.5)      # 0.607: presheath density drop (from memory; Hutchinson ch. 3)
OML_MAX_RATIO = 1.0               # r_p / lambda_D below which a cylinder collects ions by OML (common practice)
ION_BELOW = 2.5                   # ion branch: V <= Vf - ION_BELOW * Te
MIN_ION = 5
MIN_RETARDING = 4


@dataclass(frozen=True, eq=False)
class SingleFit:
    """Per-sweep results of the single-probe analysis (arrays of length S); ``fail`` holds a
    rejection token or "" and ``flags`` a comma-joined list of doubt tokens or ""."""

    Te: np.ndarray
    ne: np.ndarray
    ni: np.ndarray
    Vf: np.ndarray
    Vp: np.ndarray
    Vp_knee: np.ndarray
    I_sat: np.ndarray
    ion_slope: np.ndarray
    debye_length: np.ndarray
    sigma_Te: np.ndarray
    sigma_ne: np.ndarray
    sigma_ni: np.ndarray
    sigma_Vf: np.ndarray
    sigma_Vp: np.ndarray
    sigma_I_sat: np.ndarray
    method: np.ndarray
    n_retarding: np.ndarray
    chi2_retarding: np.ndarray
    Te_low: np.ndarray
    Te_high: np.ndarray
    sigma_Te_halves: np.ndarray
    window_volts: np.ndarray
    ion_line: LineFit
    retarding_line: LineFit
    fail: np.ndarray


def window_for(n_points: int, spec: ProbeSpec) -> int:
    """The Savitzky-Golay window (odd number of points) used for a sweep of n_points."""
    w = spec.smooth_points if spec.smooth_points is not None else max(5, n_points // 40)
    w = max(5, min(int(w), n_points // 3))
    return w if w % 2 == 1 else w - 1


def electron_saturation_density(ie_sat: np.ndarray, te: np.ndarray, area: float) -> np.ndarray:
    """n_e = I_es / (e A sqrt(e Te / (2 pi m_e))): density from the electron current at Vp (m^-3).

    I_es in A, Te in eV, A in m^2: the one-way thermal flux n v_mean / 4 of a
    Maxwellian (Hutchinson ch. 3; Merlino 2007).
    """
    with np.errstate(invalid="ignore", divide="ignore"):
        return ie_sat / (ELEMENTARY_CHARGE * area * np.sqrt(ELEMENTARY_CHARGE * te / (2.0 * PI * ELECTRON_MASS)))


def _noise(I: np.ndarray, Is: np.ndarray, h0: float) -> tuple[np.ndarray, np.ndarray]:
    """Per sweep: (floor sigma in A, relative sigma) from the smoothing residual (Gaussian mean |r| scale),
    over the points the filter smoothed (I, Is: those columns only)."""
    res = np.abs(I - Is) * (math.sqrt(PI / 2.0) / math.sqrt(max(1e-12, 1.0 - h0)))
    neg = Is <= 0
    with np.errstate(invalid="ignore", divide="ignore"):
        s0 = np.where(neg, res, 0.0).sum(axis=1) / np.maximum(np.count_nonzero(neg, axis=1), 1)
        big = Is > np.maximum(10.0 * s0, 0.0)[:, None]
        rel = np.where(big, res / np.where(big, Is, 1.0), 0.0).sum(axis=1) / np.maximum(
            np.count_nonzero(big, axis=1), 1)
    tiny = 1e-9 * np.abs(I).max(axis=1)
    return np.maximum(s0, tiny), rel


def analyse_single(V: np.ndarray, I: np.ndarray, spec: ProbeSpec) -> SingleFit:
    """Analyse sweeps V, I (S x N, bias ascending, already screened; I positive for electron collection)."""
    S, N = I.shape
    w = window_for(N, spec)
    half = w // 2
    h0 = float(savgol_weights(w, 2, 0)[half])
    rows = np.arange(S)
    inner = slice(half, N - half)
    Isf, didv = smooth_pair(I, w)                   # smoothed current (raw at the edges), dI per index
    didv[:, inner] /= (V[:, w - 1:] - V[:, :N - w + 1]) / (w - 1)     # / dV per index, over the window
    s0, rel = _noise(I[:, inner], Isf[:, inner], h0)
    sig2 = s0[:, None] ** 2 + (rel[:, None] * Isf) ** 2
    fail = np.full(S, "", dtype=object)
    cols = Columns(V)

    # plasma potential: the peak of the smoothed derivative, refined by a parabola through three points
    k = didv[:, inner].argmax(axis=1) + half
    edge = (k <= half) | (k >= N - half - 1)
    fail[edge] = "no_plasma_potential"
    kc = np.clip(k, half + 1, N - half - 2)
    dm, d0, dp = take(didv, kc - 1), take(didv, kc), take(didv, kc + 1)
    h = 0.5 * (take(V, kc + 1) - take(V, kc - 1))
    with np.errstate(invalid="ignore", divide="ignore"):
        curv = dm - 2.0 * d0 + dp
        num = dm - dp
        delta = np.clip(np.where(curv < 0, 0.5 * num / curv, 0.0), -0.5, 0.5)
        vp = take(V, kc) + delta * h
        sd = np.sqrt(take(sig2, kc) * float((savgol_weights(w, 2, 1) ** 2).sum())) / h
        g = np.stack([0.5 * (1 / curv - num / curv ** 2), num / curv ** 2, 0.5 * (-1 / curv - num / curv ** 2)])
        # noise through the vertex, the grid step, and the smoothing of the knee: the peak of a smoothed
        # cusp sits low by about a quarter of the window (0.09 Te for a 0.4 Te window on the OML
        # cylinder), taken as a standard uncertainty of window/4 (Type B, conservative)
        sigma_vp = np.sqrt((h * sd) ** 2 * np.where(curv < 0, (g ** 2).sum(axis=0), 0.25) + h ** 2 / 12.0
                           + ((w - 1) * h / 4.0) ** 2)
        te0 = (take(Isf, kc) - Isf[:, half]) / d0

    # floating potential: last upward crossing of the smoothed current below Vp
    vf, kf = last_upward_crossing(V, Isf, upto=kc)
    fail[(kf < 0) & (fail == "")] = "no_floating_potential"
    slope_f = take(didv, kf)
    with np.errstate(invalid="ignore", divide="ignore"):
        raw_slope = (take(I, kf + 1) - take(I, kf)) / (take(V, kf + 1) - take(V, kf))
        slope_f = np.where(np.isfinite(slope_f) & (slope_f > 0), slope_f, raw_slope)
        sigma_vf = np.sqrt(take(sig2, kf) * h0) / np.abs(slope_f)

    te = np.where(np.isfinite(te0) & (te0 > 0), te0, (vp - vf) / 4.0)
    for _ in range(2):                               # fits on column bands: only the columns they use
        ion_hi = vf - ION_BELOW * te
        ci = slice(0, cols.band(np.full(S, -np.inf), ion_hi).stop)
        Vi = V[:, ci]
        ion_mask = Vi <= ion_hi[:, None]
        ion = line_fit(Vi, I[:, ci], 1.0 / sig2[:, ci], ion_mask)
        rlo, rhi = vf + 0.5 * te, vp - 0.5 * te
        cr = cols.band(rlo, rhi)
        Vr = V[:, cr]
        ion_at = ion.at(Vr)
        ie, ie_s = I[:, cr] - ion_at, Isf[:, cr] - ion_at
        ret = (Vr >= rlo[:, None]) & (Vr <= rhi[:, None]) & (ie > 0) & (ie_s > 0)
        with np.errstate(invalid="ignore", divide="ignore"):
            lnie = np.log(np.where(ret, ie, 1.0))
            wr = np.where(ret, ie_s ** 2 / sig2[:, cr], 0.0)
        fit = line_fit(Vr, lnie, wr, ret)
        te_new = 1.0 / fit.b
        te = np.where(np.isfinite(te_new) & (te_new > 0), te_new, te)
    fail[(ion.n < MIN_ION) & (fail == "")] = "no_ion_branch"
    fail[(fit.n < MIN_RETARDING) & (fail == "")] = "no_retarding_region"
    te_fit = 1.0 / fit.b
    fail[~(np.isfinite(te_fit) & (te_fit > 0)) & (fail == "")] = "fit_failed"
    with np.errstate(invalid="ignore", divide="ignore"):
        sigma_te = np.sqrt(fit.var_b) * te_fit ** 2
        fail[~(sigma_te <= 0.5 * te_fit) & (fail == "")] = "uncertain_fit"      # Te not determined

    # the two halves of the retarding region, for the exponential test
    vmid = fit.x0[:, None]
    lo = line_fit(Vr, lnie, wr, ret & (Vr <= vmid))
    hi = line_fit(Vr, lnie, wr, ret & (Vr > vmid))
    with np.errstate(invalid="ignore", divide="ignore"):
        te_lo, te_hi = 1.0 / lo.b, 1.0 / hi.b
        sig_halves = np.sqrt(lo.var_b * te_lo ** 4 + hi.var_b * te_hi ** 4)

    # knee: the retarding line meets a line through ln Ie above Vp + Te/2
    cs = cols.band(vp + 0.5 * te_fit, np.full(S, np.inf))
    cs = slice(cs.start, N)
    Vs = V[:, cs]
    ion_s = ion.at(Vs)
    ie_hi, ies_hi = I[:, cs] - ion_s, Isf[:, cs] - ion_s
    sat = (Vs >= (vp + 0.5 * te_fit)[:, None]) & (ie_hi > 0) & (ies_hi > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        sfit = line_fit(Vs, np.log(np.where(sat, ie_hi, 1.0)), np.where(sat, ies_hi ** 2 / sig2[:, cs], 0.0), sat)
        knee = ((sfit.a - fit.a + fit.b * fit.x0 - sfit.b * sfit.x0) / (fit.b - sfit.b))
    knee = np.where(sfit.n >= 3, knee, np.nan)

    # densities
    area = spec.collecting_area
    e = ELEMENTARY_CHARGE
    ne = electron_saturation_density(np.exp(fit.at(vp)), te_fit, area)
    with np.errstate(invalid="ignore", divide="ignore"):
        dlnb = (vp - fit.x0) + 0.5 * te_fit
        var_lnne = fit.var_a + dlnb ** 2 * fit.var_b + (sigma_vp / te_fit) ** 2
        sigma_ne = ne * np.sqrt(var_lnne)
        debye = np.sqrt(EPSILON_0 * te_fit / (e * ne))
        i_sat = -ion.at(vf)
        sigma_isat = np.sqrt(ion.var_at(vf) + (ion.b * sigma_vf) ** 2)
        Z, mi = spec.ion_charge, spec.ion_mass
        c_s = np.sqrt(Z * e * te_fit / mi)
        ni_bohm = i_sat / (BOHM_FACTOR * Z * e * area * c_s)
        sig_bohm = ni_bohm * np.sqrt((sigma_isat / i_sat) ** 2 + (0.5 * sigma_te / te_fit) ** 2)
        Ii, Isi = I[:, ci], Isf[:, ci]
        i2 = np.where(ion_mask, Ii * Ii, 0.0)
        w2 = np.where(ion_mask, 1.0 / (4.0 * np.maximum(Isi * Isi, s0[:, None] ** 2) * sig2[:, ci]), 0.0)
        sq = line_fit(Vi, i2, w2, ion_mask)
        ni_oml = (PI / (Z * e * area)) * np.sqrt(-sq.b * mi / (2.0 * Z * e))
        sig_oml = ni_oml * 0.5 * np.sqrt(sq.var_b) / np.abs(sq.b)
    oml = (spec.geometry == "cylinder") & (spec.size / debye < OML_MAX_RATIO) & np.isfinite(ni_oml)
    method = np.where(oml, "oml", "bohm").astype(object)
    ni = np.where(oml, ni_oml, ni_bohm)
    sigma_ni = np.where(oml, sig_oml, sig_bohm)
    return SingleFit(
        Te=te_fit, ne=ne, ni=ni, Vf=vf, Vp=vp, Vp_knee=knee, I_sat=i_sat, ion_slope=ion.b, debye_length=debye,
        sigma_Te=sigma_te, sigma_ne=sigma_ne, sigma_ni=sigma_ni, sigma_Vf=sigma_vf, sigma_Vp=sigma_vp,
        sigma_I_sat=sigma_isat, method=method, n_retarding=fit.n, chi2_retarding=fit.chi2_red,
        Te_low=te_lo, Te_high=te_hi, sigma_Te_halves=sig_halves, window_volts=(w - 1) * h,
        ion_line=ion, retarding_line=fit, fail=fail[rows],
    )
