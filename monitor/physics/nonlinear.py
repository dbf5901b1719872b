"""Where first-order uncertainties stop holding: the second-order term of each derived quantity, per sample.

The rule (stated in the README). Near a sample every derived quantity q is, to
the order that matters here, a product of powers of its inputs,
ln q = ln q0 + sum_j (a_j u_j + c_j u_j^2 / 2), u_j = ln(x_j / x0_j), with
a_j = d ln q / d ln x_j the local log-derivatives and c_j their curvature
(zero for the power laws; the Coulomb logarithm and the sums nu_ei + nu_en,
ne + n0 bend). With independent Gaussian inputs of relative standard
uncertainties r_j, the Taylor expansion of q to second order in the relative
deviations gives a first-order relative sigma

    s^2 = sum_j a_j^2 r_j^2

and a second-order term whose standard deviation over s is rho, with

    rho^2 = (s^4 + sum_j (d_j^2 + 2 a_j^2 d_j) r_j^4) / (2 s^2),   d_j = c_j - a_j

(for one power-law input rho = |a - 1| r / sqrt(2): zero for a linear
dependence, 3 r / sqrt(2) for B^-2). Cross-curvatures of ln q are neglected. A linear
sigma is flagged where rho > RHO_MAX and the second-order term rho s is
above FLOOR (0.5 % of the value). This is the GUM's own criterion (JCGM
100:2008, 5.1.2: include the second-order terms when the nonlinearity is
significant) with stated thresholds; tests/physics/test_nonlinear.py checks
against our own Monte Carlo that an unflagged sigma matches the Monte Carlo's
16th-84th percentile half-width.

A second rule covers the one place where a formula jumps: the NRL Coulomb
logarithm changes branch at Te = 10 Z^2 eV with a step of 0.5 ln 10 - 1 =
0.15 (comparable to its own sigma). Where Te +- BRANCH_SIGMAS sigma_Te
straddles the branch, the Coulomb logarithm's sigma is flagged too.

Cost. s is derive()'s own first-order sigma; a_j and c_j are taken
numerically (central differences, two extra value passes per input whose
relative sigma exceeds KEY_FLOOR = GATE_RELATIVE / 2 somewhere: the r_j^4
terms of the others are negligible) and only on the samples that can fail the rule: with
|a_j| <= 2.2 for every quantity, rho <= 2.4 max_j r_j, so a batch whose
relative input sigmas all stay under GATE_RELATIVE = RHO_MAX / 2.5 costs
one maximum per input and nothing else.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Callable, Mapping

import numpy as np

from monitor.model import Device
from monitor.physics.validity import DeviceConsts, device_consts

__all__ = ["NONLINEAR", "RHO_MAX", "FLOOR", "POWER_LAWS", "GATE_RELATIVE", "KEY_FLOOR", "BRANCH_SIGMAS",
           "second_order_ratio", "nonlinear_warnings", "input_r2"]

NONLINEAR = "nonlinear_sigma"
# The second-order term may be at most this fraction of the first-order sigma.
RHO_MAX = 0.15
GATE_RELATIVE = RHO_MAX / 2.5
_GATE_R2 = GATE_RELATIVE**2
# ... and the second-order term must exceed this fraction of the value itself (a 0.1 % sigma
# whose second-order term is of the same size is not worth a warning).
FLOOR = 0.005
# Keys whose relative sigma stays under this are left out of the fourth-order sum.
KEY_FLOOR = GATE_RELATIVE / 2.0
_KEY_FLOOR2 = KEY_FLOOR**2
_LOG_STEP = 1e-3                          # step in ln x of the numerical log-derivatives (central)
_UP, _DOWN = math.exp(_LOG_STEP), math.exp(-_LOG_STEP)
_INPUTS = ("ne", "Te", "Ti", "B", "p0")
# The quantities that are pure products of powers of their inputs, with the exponents (the
# formulas of monitor/physics; |B| for B). tests/physics/test_nonlinear.py checks every entry
# against the numerical log-derivatives of the value pass.
_SPEED = {"Te": 0.5}
POWER_LAWS: dict[str, dict[str, float]] = {
    "debye_length": {"ne": -0.5, "Te": 0.5},
    "debye_number": {"ne": -0.5, "Te": 1.5},
    "debye_ratio": {"ne": 0.5, "Te": -0.5, "L": 1.0},
    "electron_plasma_frequency": {"ne": 0.5},
    "ion_plasma_frequency": {"ne": 0.5},
    "electron_most_probable_speed": _SPEED, "electron_mean_speed": _SPEED,
    "electron_rms_speed": _SPEED, "electron_thermal_speed": _SPEED,
    "electron_cyclotron_frequency": {"B": 1.0},
    "ion_cyclotron_frequency": {"B": 1.0},
    "electron_gyroradius": {"Te": 0.5, "B": -1.0},
    "ion_gyroradius": {"Ti": 0.5, "B": -1.0},
    "neutral_density": {"p0": 1.0, "Tgas": -1.0},
    "electron_neutral_collision_frequency": {"p0": 1.0, "Tgas": -1.0, "sigma_en": 1.0, "Te": 0.5},
    "cutoff_density": {"f": 2.0},
    "cutoff_ratio": {"ne": 1.0, "f": -2.0},
}
# sigma key of a device constant -> monitor.model.Device field
_DEVICE_FIELDS = {"L": "length", "f": "wave_frequency", "Tgas": "gas_temperature", "sigma_en": "sigma_en"}

Evaluate = Callable[[Mapping[str, np.ndarray], DeviceConsts], Mapping[str, np.ndarray]]


def input_r2(Q: Mapping[str, np.ndarray | float], p0: np.ndarray | float | None) -> dict[str, np.ndarray | float]:
    """Relative squared sigmas per key from derive()'s squares ``Q`` (p0 there is absolute: made relative
    here, a zero pressure counting as 0, since every quantity is linear in p0 near p0 = 0)."""
    r2 = {k: v for k, v in Q.items() if k not in ("p0_abs2", "p0_rel2")}
    if "p0_rel2" in Q:
        r2["p0"] = np.where(np.isfinite(Q["p0_rel2"]), Q["p0_rel2"], 0.0)
    elif "p0_abs2" in Q and p0 is not None:
        with np.errstate(all="ignore"):
            r = np.asarray(Q["p0_abs2"], dtype=np.float64) / (np.asarray(p0, dtype=np.float64) ** 2)
            r2["p0"] = np.where(np.isfinite(r), r, 0.0)
    return r2


def second_order_ratio(evaluate: Evaluate, x: Mapping[str, np.ndarray], r2: Mapping[str, np.ndarray | float],
                       device: Device, dc: DeviceConsts, base: Mapping[str, np.ndarray],
                       s_rel: Mapping[str, np.ndarray], analytic: bool = True) -> dict[str, np.ndarray]:
    """rho (see the module docstring) for each quantity of ``s_rel``; NaN where it cannot be told.

    ``x`` validated inputs (arrays of one length m), ``r2`` relative squared sigmas (arrays for
    inputs, floats for device constants), ``base`` the values at ``x``, ``s_rel`` each quantity's
    first-order relative sigma (derive()'s own). Only keys whose relative sigma exceeds
    KEY_FLOOR somewhere enter the fourth-order sum (the others add under ~1e-5 to rho^2 s^2).
    The pure power laws of POWER_LAWS take their exponents from the table (``analytic``);
    the others are stacked into one (quantities x m) array and differentiated numerically:
    two value passes per such key plus a dozen array operations.
    """
    m = len(next(iter(base.values()))) if base else 0
    wide = {k: rr for k, rr in r2.items() if float(np.max(rr)) > _KEY_FLOOR2}
    exact = {q: POWER_LAWS[q] for q in s_rel if analytic and q in POWER_LAWS}
    names = [q for q in s_rel if q not in exact]
    s4_of: dict[str, np.ndarray | float] = {}
    with np.errstate(all="ignore"):
        for q, powers in exact.items():                  # d_j = -a_j: d^2 + 2 a^2 d = a^2 (1 - 2 a)
            total: np.ndarray | float = 0.0
            for key, a in powers.items():
                if key in wide:
                    total = total + (a * a * (1.0 - 2.0 * a)) * (wide[key] * wide[key])
            s4_of[q] = total
        if names and m and wide:
            s4 = _numerical_s4(evaluate, x, wide, device, dc, base, names, m)
            for i, q in enumerate(names):
                s4_of[q] = s4[i]
        out: dict[str, np.ndarray] = {}
        for q in s_rel:
            s2 = s_rel[q] * s_rel[q]
            out[q] = np.sqrt(0.5 * np.abs(s2 + s4_of.get(q, 0.0) / s2))
    return out


def _numerical_s4(evaluate: Evaluate, x: Mapping[str, np.ndarray], wide: Mapping[str, np.ndarray | float],
                  device: Device, dc: DeviceConsts, base: Mapping[str, np.ndarray], names: list[str],
                  m: int) -> np.ndarray:
    """sum_j (d_j^2 + 2 a_j^2 d_j) r_j^4 for ``names`` (rows), a_j and c_j by central differences."""

    def stack(vals: Mapping[str, np.ndarray]) -> np.ndarray:
        out = np.empty((len(names), m))
        for i, q in enumerate(names):
            out[i] = vals[q]                      # a constant (e.g. the cutoff density) fills its row
        np.abs(out, out=out)
        return np.log(out, out=out)

    ln0_2 = stack(base)
    ln0_2 *= 2.0
    s4 = np.zeros((len(names), m))
    for key, rr in wide.items():
        lp = stack(_nudged(evaluate, x, key, _UP, device, dc))
        lm = stack(_nudged(evaluate, x, key, _DOWN, device, dc))
        a = lp - lm
        a *= 0.5 / _LOG_STEP                                  # d ln q / d ln x
        d = lp
        d += lm
        d -= ln0_2
        d *= 1.0 / (_LOG_STEP * _LOG_STEP)                    # c = d2 ln q / d (ln x)^2
        d -= a                                                # d = c - a
        a *= a
        a *= 2.0
        a += d
        a *= d                                                # d^2 + 2 a^2 d
        a *= rr * rr
        s4 += np.nan_to_num(a, copy=False, nan=0.0, posinf=0.0, neginf=0.0)
    return s4


def _nudged(evaluate: Evaluate, x: Mapping[str, np.ndarray], key: str, factor: float, device: Device,
            dc: DeviceConsts) -> Mapping[str, np.ndarray]:
    """The values with input or device constant ``key`` multiplied by ``factor``."""
    if key in _INPUTS:
        moved = dict(x)
        moved[key] = x[key] * factor
        return evaluate(moved, dc)
    field = _DEVICE_FIELDS[key]
    return evaluate(x, device_consts(dataclasses.replace(device, **{field: getattr(device, field) * factor})))


def nonlinear_warnings(evaluate: Evaluate, x: Mapping[str, np.ndarray], Q: Mapping[str, np.ndarray | float],
                       device: Device, dc: DeviceConsts, values: Mapping[str, np.ndarray],
                       sigmas: Mapping[str, np.ndarray], n: int) -> dict[str, np.ndarray]:
    """``{"nonlinear_sigma:<quantity>": mask}`` for the quantities whose linear sigma fails the rule somewhere.

    ``Q`` derive()'s squared relative sigmas (p0's absolute as "p0_abs2", its relative as
    "p0_rel2" where known). The numerical check runs only on the samples where some relative
    input sigma exceeds GATE_RELATIVE (the caller tests the batch's largest first).
    """
    if not Q:
        return {}
    r2 = input_r2(Q, x.get("p0"))
    wide = np.zeros(n, dtype=bool)
    for v in r2.values():
        wide |= np.asarray(v) > _GATE_R2
    idx = np.flatnonzero(wide)
    if len(idx) == 0:
        return {}
    every = len(idx) == n                       # the usual case once sigmas are wide: no copies

    def pick(v: np.ndarray | float) -> np.ndarray | float:
        if type(v) is not np.ndarray or v.ndim == 0:
            return v
        return v if every else v[idx]

    sub_x = {k: np.asarray(pick(v)) for k, v in x.items()}
    sub_r2 = {k: pick(v) for k, v in r2.items()}
    base: dict[str, np.ndarray] = {}
    s_rel: dict[str, np.ndarray] = {}
    with np.errstate(all="ignore"):
        for q, sq in sigmas.items():
            v = np.asarray(pick(values[q]))
            base[q] = v
            s_rel[q] = np.abs(np.asarray(pick(sq)) / v)
    rho = second_order_ratio(evaluate, sub_x, sub_r2, device, dc, base, s_rel)
    out: dict[str, np.ndarray] = {}
    for q, r in rho.items():
        with np.errstate(invalid="ignore"):
            bad = (r > RHO_MAX) & (r * s_rel[q] > FLOOR)
        if bad.any():
            mask = np.zeros(n, dtype=bool)
            mask[idx] = bad
            out[f"{NONLINEAR}:{q}"] = mask
    return out

BRANCH_SIGMAS = 2.0
