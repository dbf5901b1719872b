"""The value and uncertainty pass behind derive(): one function for Python floats and numpy arrays alike."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable, Mapping

import numpy as np

from monitor.physics import constants as C
from monitor.physics.collisions import NU_EI_COEFFICIENT
from monitor.physics.nonlinear import BRANCH_SIGMAS, NONLINEAR
from monitor.physics.speeds import MEAN_FACTOR, MOST_PROBABLE_FACTOR, RMS_FACTOR
from monitor.physics.uncertainty import propagate
from monitor.physics.validity import (DEGENERATE_ND2_PER_NE, RELATIVISTIC_EV, SPEED_OF_LIGHT_EV,
                                      STRONG_COUPLING_ND, DeviceConsts)

__all__ = ["Ops", "SCALAR", "VECTOR", "core_pass", "core_values"]

# Fused constants (see the per-kind modules for the formulas and sources).
_K_LAMBDA = math.sqrt(C.EPSILON_0 / C.ELEMENTARY_CHARGE)                   # lambda_D = K sqrt(Te/ne)
_K_DEBYE_NUMBER = 4.0 / 3.0 * math.pi * C.EPSILON_0 / C.ELEMENTARY_CHARGE   # N_D = K Te lambda_D
_K_WPE = math.sqrt(C.ELEMENTARY_CHARGE**2 / (C.EPSILON_0 * C.ELECTRON_MASS))
_K_VT = math.sqrt(C.ELEMENTARY_CHARGE / C.ELECTRON_MASS)                   # v_T = K sqrt(Te)
_K_WCE = C.ELEMENTARY_CHARGE / C.ELECTRON_MASS
_K_BETA = 2.0 * C.MU_0 * C.ELEMENTARY_CHARGE



@dataclass(frozen=True)
class Ops:
    sqrt: Callable[[Any], Any]
    log: Callable[[Any], Any]
    where: Callable[[Any, Any, Any], Any]
    any: Callable[[Any], bool]
    abs: Callable[[Any], Any]
    lo: Callable[[Any], Any]         # smallest non-NaN value (a float stays itself)
    hi: Callable[[Any], Any]         # largest non-NaN value
    isqrt: Callable[[Any], Any]      # in place on a fresh array temporary
    ilog: Callable[[Any], Any]       # in place on a fresh array temporary
    scalar: bool                     # floats: lo and hi are the value itself (no call)


def _same(a: Any) -> Any:
    return a


SCALAR = Ops(math.sqrt, math.log, lambda c, a, b: a if c else b, bool, abs, _same, _same, math.sqrt, math.log, True)
# The flags below are gated by one reduction each (fmin/fmax skip NaN), so the normal path pays a
# reduction, not a comparison and a test, per rule.
VECTOR = Ops(np.sqrt, np.log, np.where, lambda a: bool(a.any()), np.abs, np.fmin.reduce, np.fmax.reduce,
               lambda a: np.sqrt(a, out=a) if isinstance(a, np.ndarray) else np.sqrt(a),
               lambda a: np.log(a, out=a) if isinstance(a, np.ndarray) else np.log(a), False)


def _branch_rule(M: Ops, W: dict[str, Any], te: Any, te_lo: Any, te_hi: Any, q_te: Any, branch: float,
                 widest: float | None) -> None:
    """monitor.physics.nonlinear's Coulomb-logarithm branch rule: flag where Te +- 2 sigma straddles the branch.

    ``widest``: the largest relative square of any input if known (a bound on Te's: no reduction)."""
    top = float(M.hi(q_te) if widest is None else widest)
    reach = BRANCH_SIGMAS * math.sqrt(top)                # the largest relative reach
    if te_lo * (1.0 - reach) < branch <= te_hi * (1.0 + reach):
        r = M.sqrt(q_te)
        mask = M.abs(te - branch) < BRANCH_SIGMAS * r * te
        if M.any(mask):
            W[f"{NONLINEAR}:coulomb_logarithm"] = mask


def core_pass(M: Ops, x: Mapping[str, Any], dc: DeviceConsts, Q: Mapping[str, Any] | None,
              widest: float | None = None) -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
    """Values, sigmas and warnings for floats (M=SCALAR) or arrays (M=VECTOR) alike."""
    ne, te, ti, b, p0 = x.get("ne"), x.get("Te"), x.get("Ti"), x.get("B"), x.get("p0")
    V: dict[str, Any] = {}
    W: dict[str, Any] = {}
    aux: dict[str, Any] = {}
    wpe = vt = nu = None
    if ne is not None:
        sne = M.sqrt(ne)
        V["electron_plasma_frequency"] = wpe = _K_WPE * sne
        V["ion_plasma_frequency"] = wpe * dc.wpi_factor
    if te is not None:
        st = M.sqrt(te)
        vt = _K_VT * st
        te_lo, te_hi = (te, te) if M.scalar else (M.lo(te), M.hi(te))
        if te_hi >= RELATIVISTIC_EV:
            W["relativistic_electrons"] = te >= RELATIVISTIC_EV
            fast = te >= SPEED_OF_LIGHT_EV
            if M.any(fast):                  # withheld, never printed as a multiple of c
                W["speed_above_light"] = fast
                vt = M.where(fast, math.nan, vt)
        V["electron_most_probable_speed"] = vt * MOST_PROBABLE_FACTOR
        V["electron_mean_speed"] = vmean = vt * MEAN_FACTOR
        V["electron_rms_speed"] = vt * RMS_FACTOR
        V["electron_thermal_speed"] = vt
    if ne is not None and te is not None:
        lam = st / sne
        lam *= _K_LAMBDA
        V["debye_length"] = lam
        nd = te * lam
        nd *= _K_DEBYE_NUMBER
        V["debye_number"] = nd
        nd_lo, ne_hi = (nd, ne) if M.scalar else (M.lo(nd), M.hi(ne))
        if nd_lo <= STRONG_COUPLING_ND:
            W["electrons_strongly_coupled"] = nd <= STRONG_COUPLING_ND
        if nd_lo * nd_lo < ne_hi * DEGENERATE_ND2_PER_NE:
            W["electrons_degenerate"] = nd * nd < ne * DEGENERATE_ND2_PER_NE
        if ti is not None:
            ti_lo = ti if M.scalar else M.lo(ti)
            if ne_hi * dc.ion_coupling_per_ne >= ti_lo * ti_lo * ti_lo:
                W["ions_strongly_coupled"] = ne * dc.ion_coupling_per_ne >= ti * ti * ti
        if dc.length is not None:
            V["debye_ratio"] = dc.length / lam
        t15 = te * st
        lnl = M.ilog(t15 / sne)
        lnl += dc.coulomb_low
        hi = te >= dc.coulomb_branch
        if M.any(hi):
            lnl = M.where(hi, dc.coulomb_high + M.log(te / sne), lnl)
            aux["branch_slope"] = 1.5 - 0.5 * hi
        else:
            aux["branch_slope"] = 1.5
        V["coulomb_logarithm"] = lnl
        if ti is not None and te_lo < (ti if M.scalar else M.hi(ti)) * dc.mass_ratio:
            W["coulomb_logarithm_cold_electrons"] = te < ti * dc.mass_ratio
        nu = ne * lnl
        nu /= t15
        nu *= NU_EI_COEFFICIENT
        if (lnl if M.scalar else M.lo(lnl)) < 2.0:                  # withheld: NaN flows into everything built on the rate
            W["coulomb_logarithm_small"] = small = lnl < 2.0
            nu = M.where(small, math.nan, nu)
        if Q and "Te" in Q:
            _branch_rule(M, W, te, te_lo, te_hi, Q["Te"], dc.coulomb_branch, widest)
        V["electron_ion_collision_frequency"] = nu
    if p0 is not None:
        n0 = p0 * dc.n0_factor
        V["neutral_density"] = n0
        aux["n0_per_p0"] = dc.n0_factor
        if ne is not None:
            aux["ne_plus_n0"] = total = ne + n0
            V["ionization_fraction"] = ne / total
        if te is not None:
            aux["nu_en_per_n0"] = k_en = vmean * dc.sigma_en
            V["electron_neutral_collision_frequency"] = nu_en = n0 * k_en
            if nu is not None:
                nu = nu + nu_en
                aux["w_en"] = nu_en / nu
                aux["nu_total"] = nu
    if nu is not None:
        V["electron_mean_free_path"] = mfp = vt / nu
        if dc.length is not None:
            V["knudsen_number"] = mfp / dc.length
        V["collectivity"] = wpe / nu
    if b is not None:
        ab = M.abs(b)
        V["electron_cyclotron_frequency"] = wce = ab * _K_WCE
        V["ion_cyclotron_frequency"] = wci = ab * dc.wci_factor
        if vt is not None:
            V["electron_gyroradius"] = vt / wce
        if ti is not None:
            r_i = M.sqrt(ti)
            r_i /= wci
            r_i *= dc.vti_factor
            V["ion_gyroradius"] = r_i
        if nu is not None:
            V["hall_parameter"] = wce / nu
        if ne is not None and te is not None:
            if ti is None:
                pressure = ne * te         # fresh: divided in place below
            else:
                tsum = te + ti * dc.inv_z
                pressure = ne * tsum
                aux["beta_te_share"] = te / tsum
            pressure /= ab * ab
            pressure *= _K_BETA
            V["plasma_beta"] = pressure
    if dc.cutoff_density is not None:
        V["cutoff_density"] = dc.cutoff_density
        if ne is not None:
            V["cutoff_ratio"] = ne / dc.cutoff_density
    S = propagate(M.sqrt, M.isqrt, V, aux, Q) if Q else {}
    return V, S, W


def core_values(x: Mapping[str, np.ndarray], dc: DeviceConsts) -> dict[str, np.ndarray]:
    """Values only (no sigmas) of validated float64 arrays ``x``; for the nonlinearity check and Monte Carlo."""
    with np.errstate(all="ignore"):
        return core_pass(VECTOR, x, dc, None)[0]
