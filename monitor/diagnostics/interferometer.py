"""Interferometer analysis as pure array functions: phase from I/Q, unwrapping across batches, phase <-> density, fringe-jump flags.

Conventions: SI in and out; phases in radians; ``frequency`` is the probing
wave's ordinary frequency in Hz; ``path_length`` is the chord length through
the plasma (one pass) and ``passes`` the number of times the beam crosses it
(2 for a double-pass set-up), so the optical path in the plasma is
``passes * path_length``. The phase shift is the wave's phase lag behind the
same path in vacuum, positive for a positive density.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike

from monitor.physics.constants import ELECTRON_MASS, ELEMENTARY_CHARGE, EPSILON_0, PI, SPEED_OF_LIGHT
from monitor.physics.densities import cutoff_density

__all__ = [
    "CLASSICAL_ELECTRON_RADIUS", "EXACT_ABOVE", "REASONS", "REASON_CODES", "DensityEstimate", "PhaseReading",
    "phase_from_iq", "unwrap", "phase_shift_linear", "line_integral_from_phase", "phase_shift_exact",
    "density_from_phase_exact", "line_averaged_density", "line_density_from_phase_reading",
    "fringe_events", "hold_doubt", "off_run_mean", "discharge_from_density",
]

# r_e = e^2 / (4 pi eps0 me c^2) = 2.8179403205e-15 m (CODATA 2022; checked against
# scipy.constants' "classical electron radius" in the tests).
CLASSICAL_ELECTRON_RADIUS = ELEMENTARY_CHARGE**2 / (4.0 * PI * EPSILON_0 * ELECTRON_MASS * SPEED_OF_LIGHT**2)

# "auto" takes the exact cold-plasma form where the linear estimate reaches this fraction of the
# cutoff density: below it the linear relation is within 1 % of the exact one (its relative error
# is about n / (4 n_c)).
EXACT_ABOVE = 0.04

# reason codes of doubtful data (the stage's ``fringe_reason`` column); 0 = good
REASONS: tuple[str, ...] = ("ok", "phase_step", "amplitude_drop", "near_cutoff", "no_zero")
REASON_CODES: dict[str, int] = {name: code for code, name in enumerate(REASONS)}

_TWO_PI = 2.0 * math.pi
# off_run_mean cuts a batch with at most this many on/off changes into stretches (a loop over state
# changes); a flickering discharge flag takes the all-array path
_FEW_EDGES = 16


def phase_from_iq(i: ArrayLike, q: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Wrapped phase atan2(Q, I) in (-pi, pi] (rad) and amplitude sqrt(I^2 + Q^2) (units of I and Q).

    The amplitude is the signal-quality measure: it drops when the beam is
    refracted away or the detector loses the signal (common practice).
    """
    i_a = np.asarray(i, dtype=np.float64)
    q_a = np.asarray(q, dtype=np.float64)
    amp = i_a * i_a
    amp += q_a * q_a
    np.sqrt(amp, out=amp)                       # numpy.hypot is ~15x slower; I/Q never near overflow
    return np.arctan2(q_a, i_a), amp


def unwrap(phase: ArrayLike, previous_wrapped: float = math.nan, previous_unwrapped: float = math.nan, *,
           accumulated: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Continuous phase and the sample-to-sample steps, carrying the previous batch's last sample.

    Unwrapping by continuity: each step phi_k - phi_{k-1} is taken into
    [-pi, pi] by whole turns (the rule of ``numpy.unwrap``; a step of exactly
    pi may go either way), and the continuous phase is the wrapped one plus
    the turns taken out so far, carried from the previous batch. ``previous_*`` NaN: the first sample starts the run (step 0, value
    kept). ``accumulated``: the input is already continuous; steps are plain
    differences and the values are kept (a step over pi then stays visible).
    Returns (continuous phase, steps), both in rad.
    """
    p = np.asarray(phase, dtype=np.float64)
    diff = np.empty_like(p)
    if len(p) == 0:
        return p.copy(), diff
    first_known = math.isfinite(previous_wrapped)
    diff[0] = p[0] - previous_wrapped if first_known else 0.0
    np.subtract(p[1:], p[:-1], out=diff[1:])
    if accumulated:
        return p.copy(), diff
    # whole turns to take out of each step (rint: numpy's mod is ~40x slower here)
    turns = np.rint(diff * (1.0 / _TWO_PI))
    steps = turns * -_TWO_PI
    steps += diff
    offset = previous_unwrapped - previous_wrapped if first_known and math.isfinite(previous_unwrapped) else 0.0
    at = np.flatnonzero(turns)
    if len(at) == 0:
        return p + offset, steps
    # the continuous phase is the wrapped one plus whole turns, constant between the wraps: built by
    # repeating each stretch's offset (exact multiples of 2 pi, no drift of a running sum of steps)
    offsets = np.empty(len(at) + 1)
    offsets[0] = offset
    np.cumsum(turns[at], out=offsets[1:])
    offsets[1:] *= -_TWO_PI
    offsets[1:] += offset
    lengths = np.diff(at, prepend=0, append=len(p))
    return p + np.repeat(offsets, lengths), steps


def phase_shift_linear(line_integral: ArrayLike, wavelength: float) -> np.ndarray:
    """Phase shift far below cutoff, phi = r_e lambda integral(ne dl) (rad), for one pass.

    ``line_integral`` in m^-2, ``wavelength`` in m. From the refractive index
    N = sqrt(1 - ne/n_c) ~ 1 - ne/(2 n_c) for ne << n_c (Hutchinson,
    Principles of Plasma Diagnostics, ch. 4); r_e the classical electron
    radius (CODATA). Checked against scipy.constants in the tests.
    """
    return CLASSICAL_ELECTRON_RADIUS * wavelength * np.asarray(line_integral, dtype=np.float64)


def line_integral_from_phase(phase: ArrayLike, wavelength: float, passes: int = 1) -> np.ndarray:
    """Line-integrated density integral(ne dl) along the chord (m^-2): phi / (r_e lambda passes), far below cutoff."""
    return np.asarray(phase, dtype=np.float64) / (CLASSICAL_ELECTRON_RADIUS * wavelength * passes)


def phase_shift_exact(ne: ArrayLike, frequency: float, length: float) -> np.ndarray:
    """Phase shift of a uniform slab, phi = (omega/c) L (1 - sqrt(1 - ne/n_c)) (rad); NaN above cutoff.

    Cold unmagnetised plasma, ordinary wave, refractive index
    N = sqrt(1 - omega_pe^2/omega^2) = sqrt(1 - ne/n_c) (NRL Plasma Formulary,
    cutoff density n_c = eps0 me omega^2 / e^2). At ne = n_c the phase per
    unit length is omega/c. ``length`` is the optical path in the plasma (m).
    """
    ratio = np.asarray(ne, dtype=np.float64) / cutoff_density(frequency)
    with np.errstate(invalid="ignore"):
        out: np.ndarray = (_TWO_PI * frequency / SPEED_OF_LIGHT) * length * (1.0 - np.sqrt(1.0 - ratio))
    return out


def density_from_phase_exact(phase: ArrayLike, frequency: float, length: float) -> np.ndarray:
    """Uniform density from the exact cold-plasma form: ne = n_c x (2 - x), x = phi c / (omega L) (m^-3).

    The inverse of ``phase_shift_exact``; NaN where x > 1 (the wave would be cut off).
    """
    x = np.asarray(phase, dtype=np.float64) * (SPEED_OF_LIGHT / (_TWO_PI * frequency * length))
    n = float(cutoff_density(frequency)) * x * (2.0 - x)
    return np.where(x > 1.0, np.nan, n)


@lru_cache(maxsize=16)
def _cutoff(frequency: float) -> float:
    return float(cutoff_density(frequency))


@dataclass(frozen=True, eq=False)
class DensityEstimate:
    """Line-averaged density (m^-3) with its standard uncertainty, where the exact form was used, and n / n_c."""

    density: np.ndarray
    sigma: np.ndarray
    exact: np.ndarray
    cutoff_ratio: np.ndarray


def line_averaged_density(phase: ArrayLike, frequency: float, path_length: float, passes: int = 1, *,
                          phase_sigma: ArrayLike = 0.0, path_length_sigma: float = 0.0,
                          method: str = "auto", exact_above: float = EXACT_ABOVE) -> DensityEstimate:
    """Line-averaged density from the phase shift, with its standard uncertainty.

    With x = phi c / (omega P L) (P passes of a chord L): far below cutoff
    ne = 2 n_c x, the same as phi / (r_e lambda P L); the exact cold-plasma form
    for a uniform chord gives ne = n_c x (2 - x). ``method``: ``"linear"``,
    ``"exact"`` or ``"auto"`` (exact where the linear value reaches
    ``exact_above`` n_c). Uncertainty by the first-order law of propagation
    (GUM): sigma_n = |dn/dx| sqrt((sigma_phi / (k0 P L))^2 + (x sigma_L / L)^2),
    dn/dx = 2 n_c (linear) or 2 n_c (1 - x) (exact). NaN beyond cutoff (x > 1).
    """
    k0l = _TWO_PI * frequency / SPEED_OF_LIGHT * passes * path_length
    nc = _cutoff(frequency)
    x = np.asarray(phase, dtype=np.float64) * (1.0 / k0l)
    n = x * (2.0 * nc)
    if method == "linear":
        exact = np.zeros(n.shape, dtype=bool)
    elif method == "exact":
        exact = np.ones(n.shape, dtype=bool)
    elif method == "auto":
        exact = x >= 0.5 * exact_above
    else:
        raise ValueError(f"method must be linear, exact or auto, got {method!r}")
    sp = np.asarray(phase_sigma, dtype=np.float64) * (2.0 * nc / k0l)
    if path_length_sigma:
        sigma = x * (2.0 * nc * path_length_sigma / path_length)
        sigma *= sigma
        sigma += sp * sp
        np.sqrt(sigma, out=sigma)
    else:
        sigma = np.abs(np.broadcast_to(sp, n.shape))     # a new array
    if exact.any():
        g = np.where(exact, 1.0 - x, 1.0)
        n *= np.where(exact, 1.0 - 0.5 * x, 1.0)
        sigma *= np.abs(g)
        beyond = exact & (x > 1.0)
        n[beyond] = np.nan
        sigma[beyond] = np.nan
    return DensityEstimate(density=n, sigma=sigma, exact=exact, cutoff_ratio=n * (1.0 / nc))


@dataclass(frozen=True)
class PhaseReading:
    """One phase reading turned into a density (``regime calc``): line-averaged ne, sigma, the method used."""

    density: float          # m^-3, line-averaged
    sigma: float            # m^-3
    method: str             # "linear" or "exact"
    line_integral: float    # m^-2, density times chord length
    cutoff_density: float   # m^-3
    cutoff_ratio: float


def line_density_from_phase_reading(phase: float, frequency: float, path_length: float, passes: int = 1, *,
                                    phase_sigma: float | None = None, path_length_sigma: float | None = None,
                                    method: str = "auto", exact_above: float = EXACT_ABOVE) -> PhaseReading:
    """One phase shift (rad) -> line-averaged density with uncertainty and the method chosen (see line_averaged_density)."""
    if not (frequency > 0 and path_length > 0 and passes >= 1):
        raise ValueError("frequency, path length and passes must be positive")
    est = line_averaged_density(np.array([phase]), frequency, path_length, passes,
                                phase_sigma=phase_sigma or 0.0, path_length_sigma=path_length_sigma or 0.0,
                                method=method, exact_above=exact_above)
    n = float(est.density[0])
    return PhaseReading(density=n, sigma=float(est.sigma[0]), method="exact" if est.exact[0] else "linear",
                        line_integral=n * path_length, cutoff_density=float(cutoff_density(frequency)),
                        cutoff_ratio=float(est.cutoff_ratio[0]))


def fringe_events(steps: np.ndarray, amplitude: np.ndarray | None, cutoff_ratio: np.ndarray, on: np.ndarray, *,
                  jump_threshold: float, amplitude_min: float | np.ndarray = 0.0,
                  cutoff_margin: float = 0.9) -> np.ndarray:
    """Reason code per sample (int8, REASONS) of an event that makes the data doubtful; 0 = none.

    On discharge-on samples only: a phase step over ``jump_threshold`` x pi
    between samples (phase_step), an I/Q amplitude under ``amplitude_min``
    (amplitude_drop), a density at ``cutoff_margin`` of the cutoff or beyond
    (near_cutoff, NaN density counts). One code per sample, in that priority.
    """
    n = len(steps)
    limit = jump_threshold * math.pi
    with np.errstate(invalid="ignore"):
        cut = ~(cutoff_ratio < cutoff_margin)
        jump = (steps > limit) | (steps < -limit)
        low = amplitude < amplitude_min if amplitude is not None else None
    if not (cut.any() or jump.any() or (low is not None and low.any())):
        return np.zeros(n, dtype=np.int8)            # the common case: nothing happened
    code = np.where(cut, REASON_CODES["near_cutoff"], 0).astype(np.int8)
    if low is not None:
        code[low] = REASON_CODES["amplitude_drop"]
    code[jump] = REASON_CODES["phase_step"]
    code *= on
    return code


def hold_doubt(codes: np.ndarray, off: np.ndarray, carried: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Doubtful data held from an event until the next discharge-off sample.

    ``codes``: fringe_events' codes; ``off``: discharge-off samples (each
    re-zeroes, so it clears the doubt unless it has an event itself);
    ``carried``: the reason still in force from the previous batch (0 none).
    Returns (reason per sample, the reason of the episode's first event, 0 where
    good; episode starts as a bool array, one per lost fringe).
    """
    n = len(codes)
    ev = codes > 0
    if not ev.any():                            # no event in the batch: a carried doubt lasts to the first off
        reason = np.zeros(n, dtype=np.int8)
        if carried:
            first_off = int(np.argmax(off)) if off.any() else n
            reason[:first_off] = carried
        return reason, np.zeros(n, dtype=bool)
    idx = np.arange(n)
    last_ev = np.maximum.accumulate(np.where(ev, idx, -1 if carried else -3))
    last_off = np.maximum.accumulate(np.where(off, idx, -2))
    doubt = last_ev >= last_off
    prev = np.empty(n, dtype=bool)
    if n:
        prev[0] = bool(carried)
        prev[1:] = doubt[:-1]
    starts = doubt & ~prev
    first = np.maximum.accumulate(np.where(starts, idx, -1))
    reason = np.where(first >= 0, codes[np.maximum(first, 0)], carried).astype(np.int8)
    reason[~doubt] = 0
    return reason, starts


def off_run_mean(x: np.ndarray, off: np.ndarray, tail: np.ndarray, mean0: float, count0: float,
                 window: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per sample, the mean of ``x`` over the last ``window`` samples of the current off run, or, on
    discharge-on samples, of the last one (frozen when the discharge came on).

    An off run is a stretch of consecutive off samples. ``tail``: the values of
    the run the previous batch ended in (its last ``window`` at most; empty if
    it ended on); ``mean0``/``count0``: what on samples get before this
    batch's first off sample (NaN, 0 when there has been none). Returns (mean,
    count of samples averaged, the tail to carry into the next batch).
    """
    n, m = len(x), len(tail)
    if n and not off.any():                     # all on (the common case in a discharge): one value
        mean_t, count_t = _window_end(tail, window) if m else (mean0, count0)
        return np.full(n, mean_t), np.full(n, count_t), np.empty(0)
    if n and off.all():                         # all off: one run, the tail's continued
        xe = np.concatenate([tail, x]) if m else x
        cs = np.zeros(n + m + 1)
        np.cumsum(xe, out=cs[1:])
        sums = np.empty(n + m)
        head = min(window, n + m)
        sums[:head] = cs[1:head + 1]
        sums[head:] = cs[head + 1:] - cs[1:n + m + 1 - head]
        counts = np.minimum(np.arange(1, n + m + 1), window).astype(np.float64)
        return (sums / counts)[m:], counts[m:], xe[max(0, n + m - window):].copy()
    edges = np.flatnonzero(off[1:] != off[:-1]) + 1 if n > 1 else np.empty(0, dtype=np.int64)
    if 0 < len(edges) <= _FEW_EDGES:
        # a few on/off changes (the usual case): each stretch through the one-value or one-run path
        means: list[np.ndarray] = []
        seen: list[np.ndarray] = []
        for start, stop in zip([0, *edges.tolist()], [*edges.tolist(), n]):
            mean_i, count_i, tail = off_run_mean(x[start:stop], off[start:stop], tail, mean0, count0, window)
            mean0, count0 = float(mean_i[-1]), float(count_i[-1])
            means.append(mean_i)
            seen.append(count_i)
        return np.concatenate(means), np.concatenate(seen), tail
    xe = np.concatenate([tail, np.where(off, x, 0.0)])
    offe = np.concatenate([np.ones(m, dtype=bool), off])
    idx = np.arange(n + m)
    prev = np.zeros(n + m, dtype=bool)
    prev[1:] = offe[:-1]
    run_start = np.maximum.accumulate(np.where(offe & ~prev, idx, 0))
    cs = np.zeros(n + m + 1)
    np.cumsum(xe, out=cs[1:])
    lo = np.maximum(run_start, idx - (window - 1))
    count_here = (idx + 1 - lo).astype(np.float64)
    mean_here = (cs[idx + 1] - cs[lo]) / count_here
    last_off = np.maximum.accumulate(np.where(offe, idx, -1))
    have = last_off >= 0
    at = np.maximum(last_off, 0)
    mean = np.where(have, mean_here[at], mean0)[m:]
    count = np.where(have, count_here[at], count0)[m:]
    new_tail = xe[max(int(run_start[-1]), n + m - window):].copy() if n and off[-1] else np.empty(0)
    return mean, count, new_tail


def _window_end(values: np.ndarray, window: int) -> tuple[float, float]:
    """Mean and count of the last ``window`` values."""
    last = values[-window:]
    return float(last.mean()), float(len(last))


def discharge_from_density(density: np.ndarray, on_above: float, previous: bool, deadband: float = 0.9) -> np.ndarray:
    """Discharge on/off per sample from the density with hysteresis: on above ``on_above``, off below
    ``deadband * on_above``, unchanged between (and on NaN); ``previous`` is the state before the first sample."""
    n = len(density)
    idx = np.arange(n)
    with np.errstate(invalid="ignore"):
        up = density > on_above
        down = density < deadband * on_above
    last = np.maximum.accumulate(np.where(up | down, idx, -1))
    return np.where(last >= 0, up[np.maximum(last, 0)], previous)
