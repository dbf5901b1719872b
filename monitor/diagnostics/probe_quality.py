"""Sweep screening (malformed sweeps refused with a reason token) and the per-sweep quality verdict."""

from __future__ import annotations

import numpy as np

__all__ = ["MIN_POINTS", "MALFORMED", "ANALYSIS_FAILURES", "DOUBTS", "screen", "orient", "verdict"]

MIN_POINTS = 20
MALFORMED = ("too_few_points", "length_mismatch", "not_finite", "repeated_bias", "non_monotonic_bias",
             "saturated_rail")
ANALYSIS_FAILURES = ("no_plasma_potential", "no_floating_potential", "no_ion_branch", "no_retarding_region",
                     "fit_failed", "uncertain_fit")
# doubt token -> what it means (shown in the README and by `regime probe`)
DOUBTS: dict[str, str] = {
    "few_retarding_points": "fewer than 8 points in the retarding (exponential) region",
    "not_exponential": "the two halves of the retarding region give Te differing by > 15 % and > 3 sigma",
    "large_residuals": "retarding fit chi2/dof > 4 with the measured noise",
    "knee_disagrees": "peak of dI/dV and knee of the two fits more than 1 Te apart",
    "transitional_sheath": "probe size neither << nor >> the Debye length: neither OML nor Bohm holds well",
    "ni_ne_mismatch": "Z ni / ne outside 0.5 .. 2",
    "coarse_smoothing": "the smoothing window spans more than 1 Te",
    "double_fit_poor": "double-probe fit chi2/dof > 4 or Te sigma > 20 %",
}
RAIL_RUN = 3          # this many points exactly at the sweep's extreme current read as a clipped rail


def orient(V: np.ndarray, I: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows swept downwards (every step negative) turned to ascending bias; others unchanged."""
    with np.errstate(invalid="ignore"):
        down = (np.diff(V, axis=1) < 0).all(axis=1)
    if down.any():
        V, I = V.copy(), I.copy()
        V[down] = V[down, ::-1]
        I[down] = I[down, ::-1]
    return V, I


def screen(V: np.ndarray, I: np.ndarray) -> np.ndarray:
    """Reason token per sweep row (S,) for malformed sweeps, "" for well-formed ones (after ``orient``).

    ``too_few_points`` (< MIN_POINTS), ``not_finite`` (NaN or infinite V or I),
    ``repeated_bias`` (two equal successive biases), ``non_monotonic_bias``
    (bias goes both up and down), ``saturated_rail`` (RAIL_RUN or more points
    exactly at the sweep's highest or lowest current: a clipped amplifier).
    """
    S, N = I.shape
    reason = np.full(S, "", dtype=object)
    if N < MIN_POINTS:
        reason[:] = "too_few_points"
        return reason
    finite = np.isfinite(V).all(axis=1) & np.isfinite(I).all(axis=1)
    reason[~finite] = "not_finite"
    with np.errstate(invalid="ignore"):
        d = np.diff(V, axis=1)
        repeated = (d == 0).any(axis=1)
        backwards = (d < 0).any(axis=1)
        top = (I == np.max(I, axis=1, keepdims=True)).sum(axis=1) >= RAIL_RUN
        bottom = (I == np.min(I, axis=1, keepdims=True)).sum(axis=1) >= RAIL_RUN
    reason[(reason == "") & repeated] = "repeated_bias"
    reason[(reason == "") & backwards] = "non_monotonic_bias"
    reason[(reason == "") & (top | bottom)] = "saturated_rail"
    return reason


def _add(flags: np.ndarray, mask: np.ndarray, token: str) -> None:
    sel = np.asarray(mask, dtype=bool)
    if sel.any():
        flags[sel] = [f"{f},{token}" if f else token for f in flags[sel]]


def verdict(fail: np.ndarray, doubts: dict[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """(quality, reason) per sweep: "rejected" with the failure token, else "doubtful" with the
    comma-joined doubt tokens whose masks are set, else "accepted" with ""."""
    flags = np.full(len(fail), "", dtype=object)
    for token, mask in doubts.items():
        _add(flags, mask, token)
    rejected = fail != ""
    quality = np.where(rejected, "rejected", np.where(flags != "", "doubtful", "accepted")).astype(object)
    reason = np.where(rejected, fail, flags).astype(object)
    return quality, reason
