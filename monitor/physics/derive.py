"""One entry point that derives every regime quantity the given inputs allow, with uncertainties."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
from numpy.typing import ArrayLike

from monitor.model import Device
from monitor.physics.core import SCALAR as _SCALAR
from monitor.physics.core import VECTOR as _VECTOR
from monitor.physics.core import core_pass as _core
from monitor.physics.core import core_values
from monitor.physics.nonlinear import GATE_RELATIVE, nonlinear_warnings
from monitor.physics.tables import AFFECTS, INPUT_KEYS, REQUIRES, WARNINGS, WITHHELD, flags_of, warning_text
from monitor.physics.uncertainty import SIGMA_KEYS, relative_squares, relative_squares_block, relative_squares_top
from monitor.physics.validity import DeviceConsts, device_consts, validate_scalar, validate_vector

__all__ = ["Derived", "derive", "SCALAR_MAX", "INPUT_KEYS", "REQUIRES", "WARNINGS", "AFFECTS", "WITHHELD",
           "warning_text", "flags_of", "core_values"]

# Below this many samples a per-sample pure-Python pass beats numpy's call overhead.
SCALAR_MAX = 8
# Above this many samples the batch is derived block by block (temporaries stay in cache).
CHUNK = 16384

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
    codes that occur are present; monitor.physics.tables.WARNINGS says what
    each means). Values are kept under a warning, except under the codes of
    tables.WITHHELD (lnLambda < 2, speeds reaching c), where the quantities
    it names are NaN. ``nonlinear_sigma:<quantity>`` marks a sample whose
    linear sigma of that quantity is not trustworthy (monitor.physics.nonlinear).
    Below SCALAR_MAX samples a pure-Python pass is used; above, whole numpy arrays.
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


def _full(v: Any, n: int) -> np.ndarray:
    """``v`` as an array of n samples (already one, or a constant such as the cutoff density)."""
    if type(v) is np.ndarray and v.ndim == 1:       # type() over np.ndim(): this runs ~50 times a batch
        return v
    return np.full(n, v, dtype=np.float64)


def _derive_vector(cols: dict[str, np.ndarray], sig: dict[str, Any], dc: DeviceConsts, n: int,
                   device: Device) -> Derived:
    if not _ALLOCATOR_WARM and n >= 256:
        _warm_allocator()
    with np.errstate(all="ignore"):
        x, invalid = validate_vector(cols, n)
        Q, widest = _squares_block(sig, x, dc, n)
        V, S, W = _core(_VECTOR, x, dc, Q, widest)
    if Q and widest > GATE_RELATIVE * GATE_RELATIVE:
        _add_nonlinear(W, nonlinear_warnings(core_values, x, Q, device, dc, V, S, n))
    if "plasma_beta" in V and "Ti" not in x:
        W["plasma_beta_electrons_only"] = True
    invalid.update(_device_invalid(dc, n))
    values = {k: _full(v, n) for k, v in V.items()}
    sigma = {k: _full(v, n) for k, v in S.items()}
    warnings: dict[str, np.ndarray] = {}
    for code, mask in W.items():
        if not isinstance(mask, np.ndarray) or mask.ndim == 0:
            if mask:
                warnings[code] = np.ones(n, dtype=bool)
        elif mask.any():
            warnings[code] = mask
    return Derived(values=values, sigma=sigma, invalid=invalid, warnings=warnings)


def _add_nonlinear(W: dict[str, Any], found: Mapping[str, np.ndarray]) -> None:
    """Merge nonlinear-sigma masks into ``W`` (the branch rule may already have set one)."""
    for code, mask in found.items():
        W[code] = mask | W[code] if code in W else mask


_GATE2 = GATE_RELATIVE * GATE_RELATIVE


def _squares_top(sig: Mapping[str, float], x: Mapping[str, float],
                 dc: DeviceConsts) -> tuple[dict[str, Any] | None, float]:
    """_squares() for one sample of the scalar pass, with its largest relative square (the gate)."""
    if not sig:
        return None, 0.0
    values: dict[str, Any] = dict(x)
    for key, v in (("L", dc.length), ("f", dc.frequency), ("Tgas", dc.gas_temperature), ("sigma_en", dc.sigma_en)):
        if v is not None:
            values[key] = v
    return relative_squares_top(sig, values)


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
        Q, top = _squares_top({k: v[i] for k, v in slists.items()}, x, dc)
        V, S, W = _core(_SCALAR, x, dc, Q, top)
        wide = wide or top > _GATE2
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
            _add_nonlinear(warnings, nonlinear_warnings(core_values, x_arr, Q_arr, device, dc, values,
                                                        dict(zip(snames, sarr)), n))
    return Derived(values=values, sigma=dict(zip(snames, sarr)), invalid=invalid, warnings=warnings)
