"""First-order uncertainty propagation for the derived set: exact log-derivatives, whole arrays.

Every derived quantity q is a product of powers of the inputs, except the
Coulomb logarithm (a log with two temperature branches) and the sums
nu_ei + nu_en and ne + n0. For independent inputs x_j with relative
uncertainties r_j = sigma_j / x_j the first-order relative uncertainty is

    sigma_q / q = sqrt( sum_j (d ln q / d ln x_j)^2 r_j^2 )

with the log-derivatives written out below (e.g. lambda_D: -1/2 for ne,
+1/2 for Te). For the Coulomb logarithm d lnLambda / d ln ne = -1/2 and
d lnLambda / d ln Te = 3/2 below the 10 Z^2 eV branch, 1 above it, so
sigma_lnLambda is absolute. For nu_ei = C ne lnLambda Te^-3/2 that gives
d ln nu_ei / d ln ne = 1 - 1/(2 lnLambda), d / d ln Te = b/lnLambda - 3/2.
The total collision rate nu = nu_ei + nu_en weighs each part's
log-derivatives by its share (w = nu_part / nu). Inputs whose uncertainty
is not given count as exact; a quantity carries a sigma only when at least
one of its inputs does. The sign of a given sigma is ignored.

Works on Python floats (the scalar fast path) and on numpy arrays alike:
``ops`` supplies sqrt for one or the other.
"""

from __future__ import annotations

import math
from typing import Any, Callable, Mapping

import numpy as np

__all__ = ["relative_squares", "relative_squares_top", "relative_squares_block", "propagate", "SIGMA_KEYS"]

# Keys that may carry a standard uncertainty: the inputs and four device constants.
SIGMA_KEYS = ("ne", "Te", "Ti", "B", "p0", "L", "f", "Tgas", "sigma_en")

Num = Any  # a float or a float64 array


def relative_squares(sigma: Mapping[str, Num], values: Mapping[str, Num]) -> dict[str, Num]:
    """(sigma_x / x)^2 for every key that has both a value and a sigma; for p0 also sigma^2 ("p0_abs2")."""
    out: dict[str, Num] = {}
    for key, s in sigma.items():
        x = values.get(key)
        if x is not None and s is not None:
            if key == "p0":                 # neutrals propagate in absolute terms (p0 may be 0)
                out["p0_abs2"] = s * s
                continue
            r = s / x
            r *= r                      # fresh: in place on arrays
            out[key] = r
    return out


def relative_squares_top(sigma: Mapping[str, float], values: Mapping[str, float]) -> tuple[dict[str, float], float]:
    """relative_squares() for one sample (Python floats), and the largest relative square of any key
    (p0's made relative; a zero pressure counts as infinite): the nonlinearity check's gate."""
    out: dict[str, float] = {}
    top = 0.0
    for key, s in sigma.items():
        x = values.get(key)
        if x is not None and s is not None:
            if key == "p0":
                out["p0_abs2"] = s * s
                r = s / x if x else (math.inf if s else 0.0)
            else:
                r = s / x
            r *= r
            if key != "p0":
                out[key] = r
            if r > top:
                top = r
    return out, top


def relative_squares_block(sigma: Mapping[str, Num], values: Mapping[str, Num],
                           n: int) -> tuple[dict[str, Num], float]:
    """relative_squares() for arrays of ``n`` samples, and the largest relative square of any key
    (p0 made relative: a zero pressure counts as infinite; NaN samples skipped): the nonlinearity
    check's gate. Small batches take one reduction over all keys joined (call overhead dominates),
    large ones one reduction per key (no copy)."""
    out: dict[str, Num] = {}
    arrays: list[np.ndarray] = []
    largest = 0.0
    for key, s in sigma.items():
        x = values.get(key)
        if x is None or s is None:
            continue
        r = s / x
        r *= r
        if key == "p0":                 # neutrals propagate in absolute terms (p0 may be 0)
            out["p0_abs2"] = s * s
        else:
            out[key] = r
        if type(r) is np.ndarray:
            arrays.append(r)
        else:
            largest = max(largest, float(r))
    if arrays:
        joined = np.concatenate(arrays) if n <= 4096 and len(arrays) > 1 else None
        for a in (arrays if joined is None else [joined]):
            top = float(a.max())                # SIMD; fmax.reduce skips NaN but is ~10x slower
            if top != top:                      # a NaN (an invalid sample): the slow way, rarely
                top = float(np.fmax.reduce(a))
            largest = max(largest, top)
    return out, largest


def _sum(*terms: Num | None) -> tuple[Num | None, bool]:
    """Sum of the terms that are not None, and whether it is a fresh temporary (safe to modify)."""
    total = None
    fresh = False
    for t in terms:
        if t is None:
            continue
        if total is None:
            total = t
        elif fresh:
            total += t                  # in place on arrays, rebinding on floats
        else:
            total = total + t
            fresh = True
    return total, fresh


class _Root:
    """sqrt of a sum of squares; in place when the sum is a fresh array."""

    def __init__(self, sqrt: Callable[[Num], Num], isqrt: Callable[[Num], Num]) -> None:
        self.sqrt, self.isqrt = sqrt, isqrt

    def __call__(self, *terms: Num | None) -> Num | None:
        total, fresh = _sum(*terms)
        if total is None:
            return None
        return self.isqrt(total) if fresh else self.sqrt(total)


def _c(coef: Num, q: Num | None) -> Num | None:
    """coef * q, or None when q is None."""
    return None if q is None else coef * q


def propagate(sqrt: Callable[[Num], Num], isqrt: Callable[[Num], Num], V: Mapping[str, Num],
              aux: Mapping[str, Any], Q: Mapping[str, Num]) -> dict[str, Num]:
    """Absolute standard uncertainties of the quantities in ``V``.

    ``Q`` maps input keys to squared relative uncertainties; ``aux`` holds
    the intermediate results of the value pass (branch mask, collision-rate
    shares, ...). Returns name -> sigma for the quantities that have one.
    """
    qn, qt, qi, qb = Q.get("ne"), Q.get("Te"), Q.get("Ti"), Q.get("B")
    ql, qf = Q.get("L"), Q.get("f")
    S: dict[str, Num] = {}
    rss = _Root(sqrt, isqrt)

    def put(name: str, rel: Num | None) -> None:
        if rel is not None and name in V:
            S[name] = V[name] * rel

    # Power laws in ne alone, Te alone, B alone.
    rn = rss(qn)
    if rn is not None:
        half = 0.5 * rn
        put("electron_plasma_frequency", half)
        put("ion_plasma_frequency", half)
    rt = rss(qt)
    if rt is not None:
        half = 0.5 * rt
        for name in ("electron_most_probable_speed", "electron_mean_speed", "electron_rms_speed",
                     "electron_thermal_speed"):
            put(name, half)
    rb = rss(qb)
    if rb is not None:
        put("electron_cyclotron_frequency", rb)
        put("ion_cyclotron_frequency", rb)

    # Debye family: lambda_D ~ ne^-1/2 Te^1/2, N_D ~ ne^-1/2 Te^3/2, L/lambda_D.
    if "debye_length" in V:
        rl = rss(qn, qt)
        put("debye_length", None if rl is None else 0.5 * rl)
        put("debye_number", rss(_c(0.25, qn), _c(2.25, qt)))
        put("debye_ratio", rss(_c(0.25, qn), _c(0.25, qt), ql))

    # Coulomb logarithm (absolute sigma) and nu_ei.
    if "coulomb_logarithm" in V and (qn is not None or qt is not None):
        bt = aux["branch_slope"]                 # 1.5 below 10 Z^2 eV, 1 above
        s = rss(_c(0.25, qn), _c(bt * bt, qt))
        S["coulomb_logarithm"] = s
        inv = 1.0 / V["coulomb_logarithm"]
        an = 1.0 - 0.5 * inv                     # d ln nu_ei / d ln ne
        at = bt * inv - 1.5                      # d ln nu_ei / d ln Te
        put("electron_ion_collision_frequency", rss(_c(an * an, qn), _c(at * at, qt)))
    else:
        an = at = None

    # Neutrals in absolute variances, so that p0 = 0 (gas off) keeps a finite sigma:
    # n0 = p0 / (k Tgas), x = ne / (ne + n0), nu_en = n0 sigma_en <v> with <v> ~ Te^1/2.
    var_en_gas = None
    if "neutral_density" in V:
        n0 = V["neutral_density"]
        n0_per_p0 = aux["n0_per_p0"]
        var_n0 = _sum(_c(n0_per_p0 * n0_per_p0, Q.get("p0_abs2")), _c(n0 * n0, Q.get("Tgas")))[0]
        if var_n0 is not None:
            S["neutral_density"] = sqrt(var_n0)
        if "ionization_fraction" in V:
            x = V["ionization_fraction"]
            xx = x * (1.0 - x)
            y = x / aux["ne_plus_n0"]             # -dx/dn0 = ne / (ne + n0)^2
            s = rss(_c(xx * xx, qn), _c(y * y, var_n0))
            if s is not None:
                S["ionization_fraction"] = s
        if "electron_neutral_collision_frequency" in V:
            nu_en = V["electron_neutral_collision_frequency"]
            k = aux["nu_en_per_n0"]
            var_en_gas = _sum(_c(k * k, var_n0), _c(nu_en * nu_en, Q.get("sigma_en")))[0]  # all but Te
            s = rss(var_en_gas, _c(0.25 * nu_en * nu_en, qt))
            if s is not None:
                S["electron_neutral_collision_frequency"] = s

    # Total electron collision rate nu = nu_ei + nu_en: shares weigh the log-derivatives.
    if "electron_mean_free_path" in V or "collectivity" in V or "hall_parameter" in V:
        w_en = aux.get("w_en")                   # nu_en / nu, absent when no neutrals
        dn = an if an is not None else 0.0
        dt = at if at is not None else 0.0
        if w_en is not None:
            w_ei = 1.0 - w_en
            dn = w_ei * dn
            dt = w_ei * dt + 0.5 * w_en
            nu = aux["nu_total"]
            q_g = None if var_en_gas is None else var_en_gas / (nu * nu)
        else:
            q_g = None
        q_dn = _c(dn * dn, qn) if an is not None else None
        # mean free path = v_T / nu: d/d ln Te = 1/2 - dt
        mt = 0.5 - dt
        put("electron_mean_free_path", rss(q_dn, _c(mt * mt, qt), q_g))
        put("knudsen_number", rss(q_dn, _c(mt * mt, qt), q_g, ql))
        # collectivity = omega_pe / nu: d/d ln ne = 1/2 - dn
        cn = 0.5 - dn
        q_dt = _c(dt * dt, qt) if at is not None else None
        put("collectivity", rss(_c(cn * cn, qn), q_dt, q_g))
        # hall = omega_ce / nu
        put("hall_parameter", rss(q_dn, q_dt, q_g, qb))

    # Gyroradii: r_e ~ Te^1/2 / B, r_i ~ Ti^1/2 / B.
    put("electron_gyroradius", rss(_c(0.25, qt), qb))
    put("ion_gyroradius", rss(_c(0.25, qi), qb))

    # beta ~ ne (Te + Ti/Z) / B^2; g = Te / (Te + Ti/Z) (1 without Ti).
    if "plasma_beta" in V:
        g = aux.get("beta_te_share")
        if g is None:
            put("plasma_beta", rss(qn, qt, _c(4.0, qb)))
        else:
            h = 1.0 - g
            put("plasma_beta", rss(qn, _c(g * g, qt), _c(h * h, qi), _c(4.0, qb)))

    # Cutoff density ~ f^2 and ratio ne / n_c.
    put("cutoff_density", _c(2.0, rss(qf)))
    put("cutoff_ratio", rss(qn, _c(4.0, qf)))
    return S
