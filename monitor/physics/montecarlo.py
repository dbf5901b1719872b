"""A vectorised Monte Carlo of the derived set: 16th/50th/84th percentiles where linear propagation fails.

Each input and device constant with a standard uncertainty is drawn from a
normal distribution (independent inputs, as the first-order propagation
assumes; JCGM 101:2008, the GUM's Supplement 1, propagation of distributions).
A draw that leaves an input's physical domain (ne, Te, Ti, L, f, Tgas,
sigma_en <= 0, p0 < 0) is discarded and counted: the interval is then that of
the truncated distribution. Every draw goes through exactly the value pass of
derive() (the same validity rules: a rate withheld at lnLambda < 2 is NaN in
that draw; such draws are counted per quantity and left out of its percentiles).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from monitor.model import Device
from monitor.physics import constants as C
from monitor.physics.derive import CHUNK, INPUT_KEYS, core_values
from monitor.physics.validity import DeviceConsts, cutoff_density_of, device_consts, validate_vector

__all__ = ["Interval", "MonteCarlo", "monte_carlo", "MAX_DRAWS", "MIN_DRAWS"]

MIN_DRAWS = 100
MAX_DRAWS = 2_000_000
_DEVICE_KEYS = ("L", "f", "Tgas", "sigma_en")


@dataclass(frozen=True)
class Interval:
    """Percentiles of one quantity over the draws where it is finite; ``withheld`` draws were NaN."""

    p16: float
    p50: float
    p84: float
    finite: int
    withheld: int


@dataclass(frozen=True)
class MonteCarlo:
    draws: int
    kept: int
    discarded: Mapping[str, int]        # input key -> draws discarded for leaving its domain
    intervals: Mapping[str, Interval]   # quantity -> percentiles (quantities with some input uncertainty)


def _draw(rng: np.random.Generator, value: float, sigma: float | None, m: int) -> np.ndarray:
    if sigma is None or sigma == 0:
        return np.full(m, value, dtype=np.float64)
    out = rng.standard_normal(m)
    out *= abs(sigma)
    out += value
    return out


def _device_draws(device: Device, draws: Mapping[str, np.ndarray]) -> DeviceConsts:
    """The DeviceConsts of ``device`` with the drawn constants as arrays (see DeviceConsts)."""
    dc = device_consts(device)
    changes: dict[str, float | np.ndarray | None] = {}
    if "L" in draws:
        changes["length"] = draws["L"]
    if "f" in draws:
        changes["frequency"] = draws["f"]
        changes["cutoff_density"] = cutoff_density_of(draws["f"])
    if "Tgas" in draws:
        changes["gas_temperature"] = draws["Tgas"]
        changes["n0_factor"] = 1.0 / (C.BOLTZMANN * draws["Tgas"])
    if "sigma_en" in draws:
        changes["sigma_en"] = draws["sigma_en"]
    return dataclasses.replace(dc, **changes) if changes else dc   # type: ignore[arg-type]


def monte_carlo(inputs: Mapping[str, float], device: Device, sigma: Mapping[str, float], draws: int,
                seed: int | None = 0) -> MonteCarlo:
    """Percentiles of every derived quantity that depends on an input with a sigma.

    ``inputs``: canonical keys (ne m^-3, Te eV, Ti eV, B T, p0 Pa) -> value;
    ``sigma``: absolute standard uncertainties of inputs and of L, f, Tgas,
    sigma_en. ``draws`` between MIN_DRAWS and MAX_DRAWS; work in blocks of
    CHUNK so memory stays at one block plus the kept values.
    """
    if not MIN_DRAWS <= draws <= MAX_DRAWS:
        raise ValueError(f"draws must be between {MIN_DRAWS} and {MAX_DRAWS}, got {draws}")
    rng = np.random.default_rng(seed)
    base = {k: float(v) for k, v in inputs.items() if k in INPUT_KEYS}
    dev_values = {"L": device.length, "f": device.wave_frequency, "Tgas": device.gas_temperature,
                  "sigma_en": device.sigma_en}
    uncertain = {k for k, s in sigma.items() if s and (k in base or dev_values.get(k) is not None)}
    # which quantities move: compare one exact pass with one where every uncertain key is nudged
    dc0 = device_consts(device)
    x0 = {k: np.array([v]) for k, v in base.items()}
    v0 = core_values(validate_vector(x0, 1)[0], dc0)
    nudged_x = {k: (v * 1.001 if k in uncertain else v) for k, v in x0.items()}
    nudged_dev = {k: np.array([float(dev_values[k] or 0.0) * 1.001]) for k in _DEVICE_KEYS if k in uncertain}
    v1 = core_values(validate_vector(nudged_x, 1)[0], _device_draws(device, nudged_dev))
    names = [q for q in v0 if not np.array_equal(np.broadcast_to(v0[q], (1,)), np.broadcast_to(v1[q], (1,)),
                                                  equal_nan=True)]
    collected: dict[str, list[np.ndarray]] = {q: [] for q in names}
    withheld = dict.fromkeys(names, 0)
    discarded: dict[str, int] = {}
    kept = 0
    for start in range(0, draws, CHUNK):
        m = min(CHUNK, draws - start)
        x = {k: _draw(rng, v, sigma.get(k) if k in uncertain else None, m) for k, v in base.items()}
        dv = {k: _draw(rng, float(dev_values[k] or 0.0), sigma[k], m) for k in _DEVICE_KEYS if k in uncertain}
        ok = np.ones(m, dtype=bool)
        for key, arr in (*x.items(), *dv.items()):
            bad = (arr < 0.0) if key == "p0" else (arr <= 0.0) if key != "B" else np.zeros(m, dtype=bool)
            if bad.any():
                discarded[key] = discarded.get(key, 0) + int(np.count_nonzero(bad & ok))
                ok &= ~bad
        if not ok.all():
            x = {k: v[ok] for k, v in x.items()}
            dv = {k: v[ok] for k, v in dv.items()}
        kept += int(np.count_nonzero(ok))
        vx, _ = validate_vector(x, len(next(iter(x.values()))) if x else 0)
        got = core_values(vx, _device_draws(device, dv))
        for q in names:
            arr = np.broadcast_to(np.asarray(got[q], dtype=np.float64), (int(np.count_nonzero(ok)),))
            fin = np.isfinite(arr)
            withheld[q] += int(len(arr) - np.count_nonzero(fin))
            collected[q].append(arr[fin])
    intervals: dict[str, Interval] = {}
    for q in names:
        allv = np.concatenate(collected[q]) if collected[q] else np.empty(0)
        if len(allv) == 0:
            intervals[q] = Interval(math.nan, math.nan, math.nan, 0, withheld[q])
            continue
        p16, p50, p84 = np.percentile(allv, (15.865525393145708, 50.0, 84.13447460685429))
        intervals[q] = Interval(float(p16), float(p50), float(p84), int(len(allv)), withheld[q])
    return MonteCarlo(draws=draws, kept=kept, discarded=discarded, intervals=intervals)
