"""One entry point that derives every regime quantity the given inputs allow, with uncertainties."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

import numpy as np
from numpy.typing import ArrayLike

from monitor.model import Device
from monitor.physics import constants as C
from monitor.physics.collisions import NU_EI_COEFFICIENT
from monitor.physics.speeds import MEAN_FACTOR, MOST_PROBABLE_FACTOR, RMS_FACTOR
from monitor.physics.nonlinear import BRANCH_SIGMAS, GATE_RELATIVE, NONLINEAR, nonlinear_warnings
from monitor.physics.tables import AFFECTS, INPUT_KEYS, REQUIRES, WARNINGS, WITHHELD, flags_of, warning_text
from monitor.physics.uncertainty import SIGMA_KEYS, propagate, relative_squares, relative_squares_block
from monitor.physics.validity import (DEGENERATE_ND2_PER_NE, ION_COUPLING_PER_NE, RELATIVISTIC_EV,
                                      SPEED_OF_LIGHT_EV, STRONG_COUPLING_ND, DeviceConsts, device_consts,
                                      validate_scalar, validate_vector)

__all__ = ["Derived", "derive", "SCALAR_MAX", "INPUT_KEYS", "REQUIRES", "WARNINGS", "AFFECTS", "WITHHELD",
           "warning_text", "flags_of", "core_values"]

# Below this many samples a per-sample pure-Python pass beats numpy's call overhead.
SCALAR_MAX = 8
# Above this many samples the batch is derived block by block (temporaries stay in cache).
CHUNK = 16384

# Fused constants (see the per-kind modules for the formulas and sources).
_K_LAMBDA = math.sqrt(C.EPSILON_0 / C.ELEMENTARY_CHARGE)                   # lambda_D = K sqrt(Te/ne)
_K_DEBYE_NUMBER = 4.0 / 3.0 * math.pi * C.EPSILON_0 / C.ELEMENTARY_CHARGE   # N_D = K Te lambda_D
_K_WPE = math.sqrt(C.ELEMENTARY_CHARGE**2 / (C.EPSILON_0 * C.ELECTRON_MASS))
_K_VT = math.sqrt(C.ELEMENTARY_CHARGE / C.ELECTRON_MASS)                   # v_T = K sqrt(Te)
_K_WCE = C.ELEMENTARY_CHARGE / C.ELECTRON_MASS
_K_BETA = 2.0 * C.MU_0 * C.ELEMENTARY_CHARGE


@dataclass(frozen=True, eq=False)
class Derived:
    """Derived quantities for N samples.

    ``values`` and ``sigma``: quantity name -> float64 array (N). ``invalid``:
    reason -> bool mask (N) of samples whose inputs are physically
    meaningless (their derived values are NaN). ``warnings``: code -> bool mask
    of samples outside a formula's validity (values kept).
    """

    values: dict[str, np.ndarray]
    sigma: dict[str, np.ndarray]
    invalid: dict[str, np.ndarray] = field(default_factory=dict)
    warnings: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def valid(self) -> np.ndarray:
        arrays = [*self.values.values(), *self.invalid.values()]
        ok = np.ones(len(arrays[0]) if arrays else 0, dtype=bool)
        for mask in self.invalid.values():
            ok &= ~mask
        return ok


@dataclass(frozen=True)
class _Ops:
    sqrt: Callable[[Any], Any]
    log: Callable[[Any], Any]
    where: Callable[[Any, Any, Any], Any]
    any: Callable[[Any], bool]
    abs: Callable[[Any], Any]
    lo: Callable[[Any], Any]         # smallest non-NaN value (a float stays itself)
    hi: Callable[[Any], Any]         # largest non-NaN value
    isqrt: Callable[[Any], Any]      # in place on a fresh array temporary
    ilog: Callable[[Any], Any]       # in place on a fresh array temporary


def _same(a: Any) -> Any:
    return a


_SCALAR = _Ops(math.sqrt, math.log, lambda c, a, b: a if c else b, bool, abs, _same, _same, math.sqrt, math.log)
# The flags below are gated by one reduction each (fmin/fmax skip NaN), so the normal path pays a
# reduction, not a comparison and a test, per rule.
_VECTOR = _Ops(np.sqrt, np.log, np.where, lambda a: bool(a.any()), np.abs, np.fmin.reduce, np.fmax.reduce,
               lambda a: np.sqrt(a, out=a) if isinstance(a, np.ndarray) else np.sqrt(a),
               lambda a: np.log(a, out=a) if isinstance(a, np.ndarray) else np.log(a))


def _branch_rule(M: _Ops, W: dict[str, Any], te: Any, te_lo: Any, te_hi: Any, q_te: Any, branch: float) -> None:
    """monitor.physics.nonlinear's Coulomb-logarithm branch rule: flag where Te +- 2 sigma straddles the branch."""
    reach = BRANCH_SIGMAS * M.sqrt(M.hi(q_te))          # largest relative reach
    if te_lo * (1.0 - reach) < branch <= te_hi * (1.0 + reach):
        r = M.sqrt(q_te)
        mask = M.abs(te - branch) < BRANCH_SIGMAS * r * te
        if M.any(mask):
            W[f"{NONLINEAR}:coulomb_logarithm"] = mask


def _core(M: _Ops, x: Mapping[str, Any], dc: DeviceConsts, Q: Mapping[str, Any] | None,
          ) -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
    """Values, sigmas and warnings for floats (M=_SCALAR) or arrays (M=_VECTOR) alike."""
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
        te_lo, te_hi = M.lo(te), M.hi(te)
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
        nd_lo, ne_hi = M.lo(nd), M.hi(ne)
        if nd_lo <= STRONG_COUPLING_ND:
            W["electrons_strongly_coupled"] = nd <= STRONG_COUPLING_ND
        if nd_lo * nd_lo < ne_hi * DEGENERATE_ND2_PER_NE:
            W["electrons_degenerate"] = nd * nd < ne * DEGENERATE_ND2_PER_NE
        if ti is not None:
            ti_lo = M.lo(ti)
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
        if ti is not None and te_lo < M.hi(ti) * dc.mass_ratio:
            W["coulomb_logarithm_cold_electrons"] = te < ti * dc.mass_ratio
        nu = ne * lnl
        nu /= t15
        nu *= NU_EI_COEFFICIENT
        if M.lo(lnl) < 2.0:                  # withheld: NaN flows into everything built on the rate
            W["coulomb_logarithm_small"] = small = lnl < 2.0
            nu = M.where(small, math.nan, nu)
        if Q and "Te" in Q:
            _branch_rule(M, W, te, te_lo, te_hi, Q["Te"], dc.coulomb_branch)
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
        return _core(_VECTOR, x, dc, None)[0]


def _column(value: ArrayLike) -> np.ndarray:
    return np.asarray(value, dtype=np.float64).reshape(-1)


def derive(
    inputs: Mapping[str, ArrayLike],
    device: Device,
    sigma: Mapping[str, ArrayLike] | None = None,
) -> Derived:
    """Derive every quantity of ``monitor.quantities.DERIVED`` that ``inputs``
    (canonical keys ne m^-3, Te eV, Ti eV, B T, p0 Pa; arrays of one length N
    or scalars) and ``device`` allow, with first-order uncertainties.

    ``sigma`` holds absolute standard uncertainties for any input key and
    optionally for the device constants L, f, Tgas, sigma_en (scalars).
    Bad numbers never raise: the sample's dependent values become NaN and
    ``invalid[reason]`` marks it (only reasons that occur are present);
    ``warnings[code]`` marks samples outside a formula's validity (only
    codes that occur are present). Below SCALAR_MAX samples a pure-Python
    pass is used; above, whole numpy arrays.
    """
    dc = device_consts(device)
    cols = {k: _column(inputs[k]) for k in INPUT_KEYS if k in inputs and inputs[k] is not None}
    n = max((len(c) for c in cols.values()), default=1)
    for k, c in cols.items():
        if len(c) != n:
            if len(c) != 1:
                raise ValueError(f"input {k!r} has {len(c)} samples, others have {n}")
            cols[k] = np.full(n, c[0])
    sig: dict[str, Any] = {}
    if sigma:
        for k in SIGMA_KEYS:
            s = sigma.get(k)
            if s is None or (k in INPUT_KEYS and k not in cols):
                continue
            if k in INPUT_KEYS:
                s = _column(s)
                sig[k] = s if len(s) == n else np.full(n, s[0]) if len(s) == 1 else _bad_len(k, len(s), n)
            else:
                sig[k] = float(np.asarray(s, dtype=np.float64).reshape(-1)[0])
    if n < SCALAR_MAX:
        try:
            return _derive_scalar(cols, sig, dc, n, device)
        except (ArithmeticError, ValueError):
            pass                                  # e.g. a zero field: numpy gives inf, math raises
    if n > CHUNK:
        return _derive_chunked(cols, sig, dc, n, device)
    return _derive_vector(cols, sig, dc, n, device)


def _derive_chunked(cols: dict[str, np.ndarray], sig: dict[str, Any], dc: DeviceConsts, n: int,
                    device: Device) -> Derived:
    """Large batches in blocks of CHUNK samples so the temporaries stay in cache; same results."""
    values: dict[str, np.ndarray] = {}
    sigma: dict[str, np.ndarray] = {}
    invalid: dict[str, np.ndarray] = {}
    warnings: dict[str, np.ndarray] = {}
    for a in range(0, n, CHUNK):
        b = min(a + CHUNK, n)
        part = _derive_vector({k: c[a:b] for k, c in cols.items()},
                              {k: (s[a:b] if isinstance(s, np.ndarray) else s) for k, s in sig.items()}, dc, b - a,
                              device)
        for out, got in ((values, part.values), (sigma, part.sigma)):
            for k, v in got.items():
                if k not in out:
                    out[k] = np.empty(n, dtype=np.float64)
                out[k][a:b] = v
        for out, got in ((invalid, part.invalid), (warnings, part.warnings)):
            for k, v in got.items():
                if k not in out:
                    out[k] = np.zeros(n, dtype=bool)
                out[k][a:b] = v
    return Derived(values=values, sigma=sigma, invalid=invalid, warnings=warnings)


def _bad_len(key: str, got: int, n: int) -> np.ndarray:
    raise ValueError(f"sigma {key!r} has {got} samples, inputs have {n}")


def _squares(sig: Mapping[str, Any], x: Mapping[str, Any], dc: DeviceConsts, ieee: bool) -> dict[str, Any] | None:
    """Squared relative uncertainties of the inputs and device constants that have a sigma."""
    if not sig:
        return None
    values = dict(x)
    for key, v in (("L", dc.length), ("f", dc.frequency), ("Tgas", dc.gas_temperature), ("sigma_en", dc.sigma_en)):
        if v is not None:
            # vector pass: IEEE division (a zero gives inf); the scalar pass falls back on ZeroDivisionError
            values[key] = np.float64(v) if ieee else v
    return relative_squares(sig, values)


def _squares_block(sig: Mapping[str, Any], x: Mapping[str, Any], dc: DeviceConsts,
                   n: int) -> tuple[dict[str, Any] | None, float]:
    """_squares() for the vector pass, with the largest relative square of any input (the nonlinearity gate)."""
    if not sig:
        return None, 0.0
    values = dict(x)
    for key, v in (("L", dc.length), ("f", dc.frequency), ("Tgas", dc.gas_temperature), ("sigma_en", dc.sigma_en)):
        if v is not None:
            values[key] = np.float64(v)
    return relative_squares_block(sig, values, n)


def _device_invalid(dc: DeviceConsts, n: int) -> dict[str, np.ndarray]:
    return {reason: np.ones(n, dtype=bool) for reason in dc.invalid}


_ALLOCATOR_WARM = False


def _warm_allocator() -> None:
    """Free one 16 MiB block once so glibc's adaptive malloc thresholds rise.

    The vector pass keeps ~100 arrays of N float64 alive. With glibc's
    default 128 KiB trim threshold the freed heap is handed back to the OS
    after every call and re-faulted on the next one (4-5x slower at N = 1e4).
    Freeing one block served by mmap raises the mmap and trim thresholds
    (glibc's documented dynamic behaviour); other allocators are unaffected.
    """
    global _ALLOCATOR_WARM
    block = np.ones(1 << 21)          # 16 MiB (under glibc's 32 MiB cap), touched
    del block
    _ALLOCATOR_WARM = True


def _derive_vector(cols: dict[str, np.ndarray], sig: dict[str, Any], dc: DeviceConsts, n: int,
                   device: Device) -> Derived:
    if not _ALLOCATOR_WARM and n >= 256:
        _warm_allocator()
    with np.errstate(all="ignore"):
        x, invalid = validate_vector(cols, n)
        Q, widest = _squares_block(sig, x, dc, n)
        V, S, W = _core(_VECTOR, x, dc, Q)
    if Q and widest > GATE_RELATIVE * GATE_RELATIVE:
        _add_nonlinear(W, nonlinear_warnings(core_values, x, Q, device, dc, V, list(S), n))
    if "plasma_beta" in V and "Ti" not in x:
        W["plasma_beta_electrons_only"] = True
    invalid.update(_device_invalid(dc, n))
    values = {k: (v if np.ndim(v) == 1 else np.full(n, v, dtype=np.float64)) for k, v in V.items()}
    sigma = {k: (v if np.ndim(v) == 1 else np.full(n, v, dtype=np.float64)) for k, v in S.items()}
    warnings: dict[str, np.ndarray] = {}
    for code, mask in W.items():
        if np.ndim(mask) == 0:
            if mask:
                warnings[code] = np.ones(n, dtype=bool)
        elif mask.any():
            warnings[code] = mask
    return Derived(values=values, sigma=sigma, invalid=invalid, warnings=warnings)


def _add_nonlinear(W: dict[str, Any], found: Mapping[str, np.ndarray]) -> None:
    """Merge nonlinear-sigma masks into ``W`` (the branch rule may already have set one)."""
    for code, mask in found.items():
        W[code] = mask | W[code] if code in W else mask


def _scalar_wide(Q: Mapping[str, float] | None, p0: float | None) -> bool:
    """Whether one sample's relative input sigmas open the nonlinearity check (see nonlinear.GATE_RELATIVE)."""
    if not Q:
        return False
    limit = GATE_RELATIVE * GATE_RELATIVE
    for key, q in Q.items():
        if key == "p0_abs2":
            if p0 and q > limit * p0 * p0:
                return True
        elif q > limit:
            return True
    return False


def _derive_scalar(cols: dict[str, np.ndarray], sig: dict[str, Any], dc: DeviceConsts, n: int,
                   device: Device) -> Derived:
    """The same computation on Python floats, one sample at a time (small N only)."""
    lists = {k: c.tolist() for k, c in cols.items()}
    slists = {k: (s.tolist() if isinstance(s, np.ndarray) else [s] * n) for k, s in sig.items()}
    vrows: list[list[float]] = []
    srows: list[list[float]] = []
    reasons: dict[str, list[int]] = {}
    flags: dict[str, list[int]] = {}
    vnames: list[str] = []
    snames: list[str] = []
    wide = False
    for i in range(n):
        x = {k: v[i] for k, v in lists.items()}
        for reason in validate_scalar(x):
            reasons.setdefault(reason, []).append(i)
        Q = _squares({k: v[i] for k, v in slists.items()}, x, dc, False)
        V, S, W = _core(_SCALAR, x, dc, Q)
        wide = wide or _scalar_wide(Q, x.get("p0"))
        if i == 0:
            vnames, snames = list(V), list(S)
        vrows.append([V[k] for k in vnames])
        srows.append([S[k] for k in snames])
        for code, flag in W.items():
            if flag:
                flags.setdefault(code, []).append(i)
    if "plasma_beta" in vnames and "Ti" not in cols:
        flags["plasma_beta_electrons_only"] = list(range(n))
    varr = np.array(vrows, dtype=np.float64).T.copy()
    sarr = np.array(srows, dtype=np.float64).T.copy()
    invalid = {}
    for reason, rows in reasons.items():
        mask = np.zeros(n, dtype=bool)
        mask[rows] = True
        invalid[reason] = mask
    invalid.update(_device_invalid(dc, n))
    warnings = {}
    for code, rows in flags.items():
        mask = np.zeros(n, dtype=bool)
        mask[rows] = True
        warnings[code] = mask
    values = dict(zip(vnames, varr))
    if wide:                                # rare on this path: the vector check on the few samples
        with np.errstate(all="ignore"):
            x_arr, _ = validate_vector(cols, n)
            Q_arr = _squares(sig, x_arr, dc, True)
        if Q_arr:
            _add_nonlinear(warnings, nonlinear_warnings(core_values, x_arr, Q_arr, device, dc, values, snames, n))
    return Derived(values=values, sigma=dict(zip(snames, sarr)), invalid=invalid, warnings=warnings)
