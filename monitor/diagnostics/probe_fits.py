"""Vectorised building blocks of the sweep analysis: Savitzky-Golay smoothing, masked weighted line fits, crossings."""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

__all__ = ["savgol_weights", "smooth", "smooth_pair", "Columns", "LineFit", "line_fit", "last_upward_crossing", "take"]


@lru_cache(maxsize=32)
def savgol_weights(window: int, order: int, deriv: int) -> np.ndarray:
    """Savitzky-Golay filter weights (window odd, polynomial ``order``, derivative ``deriv`` per index step).

    The least-squares polynomial over the window, evaluated (or differentiated)
    at its centre: row ``deriv`` of the pseudo-inverse of the Vandermonde
    matrix, times deriv!. Savitzky & Golay, Anal. Chem. 36, 1627 (1964).
    """
    half = window // 2
    k = np.arange(-half, half + 1, dtype=np.float64)
    vander = k[:, None] ** np.arange(order + 1)[None, :]
    w = np.linalg.pinv(vander)[deriv] * float(np.prod(np.arange(1, deriv + 1)))
    w.setflags(write=False)
    return w


def smooth(y: np.ndarray, window: int, order: int = 2, deriv: int = 0) -> np.ndarray:
    """Savitzky-Golay smoothed rows of ``y`` (S, N) (or their derivative per index); NaN in the half-window edges."""
    half = window // 2
    out = np.full(y.shape, np.nan)
    if y.shape[1] < window:
        return out
    out[:, half:y.shape[1] - half] = sliding_window_view(y, window, axis=1) @ savgol_weights(window, order, deriv)
    return out


def smooth_pair(y: np.ndarray, window: int) -> tuple[np.ndarray, np.ndarray]:
    """Savitzky-Golay (order 2) smoothed rows of ``y`` and their derivative per index, in one pass.

    The smoothed rows keep the raw values in the half-window edges; the derivative is NaN there.
    """
    half = window // 2
    value, slope = y.copy(), np.full(y.shape, np.nan)
    if y.shape[1] < window:
        return value, slope
    both = sliding_window_view(y, window, axis=1) @ _pair_weights(window)
    value[:, half:y.shape[1] - half] = both[:, :, 0]
    slope[:, half:y.shape[1] - half] = both[:, :, 1]
    return value, slope


@lru_cache(maxsize=32)
def _pair_weights(window: int) -> np.ndarray:
    w = np.ascontiguousarray(np.stack([savgol_weights(window, 2, 0), savgol_weights(window, 2, 1)], axis=1))
    w.setflags(write=False)
    return w


class Columns:
    """Column bands of rows with ascending bias: each row's position of a bound by one binary search
    in the rows laid end to end (row r shifted by r times more than the whole bias span)."""

    def __init__(self, V: np.ndarray) -> None:
        self.n = V.shape[1]
        lo, hi = float(np.min(V[:, 0])), float(np.max(V[:, -1]))
        self.base = lo
        self.step = 2.0 * (hi - lo) + 1.0
        self.shift = np.arange(V.shape[0]) * self.step
        self.flat = ((V - lo) + self.shift[:, None]).ravel()
        self.starts = np.arange(V.shape[0]) * self.n

    def count_below(self, x: np.ndarray, inclusive: bool) -> np.ndarray:
        """Per row, the number of points with V < x (V <= x when inclusive); x clipped into the row's span."""
        xc = np.clip(x - self.base, -0.25 * self.step, 0.75 * self.step) + self.shift
        return np.searchsorted(self.flat, xc, side="right" if inclusive else "left") - self.starts

    def band(self, lo: np.ndarray, hi: np.ndarray) -> slice:
        """The columns holding every row's points with lo <= V <= hi (NaN bounds ignored)."""
        lo_f = np.where(np.isnan(lo), np.inf, lo)
        hi_f = np.where(np.isnan(hi), -np.inf, hi)
        c0 = int(self.count_below(lo_f, False).min(initial=self.n))
        c1 = int(self.count_below(hi_f, True).max(initial=0))
        return slice(c0, max(c0, c1))


@dataclass(frozen=True, eq=False)
class LineFit:
    """Per-row weighted straight line y = a + b (x - x0) with x0 the weighted mean of x (so cov(a, b) = 0).

    ``var_a``/``var_b`` are the covariance diagonal scaled by max(1, chi2/dof)
    (the measured residual noise when it exceeds the stated weights); ``n`` the
    points used; ``chi2_red`` chi2/dof with the stated weights (NaN below 3 points).
    """

    a: np.ndarray
    b: np.ndarray
    x0: np.ndarray
    var_a: np.ndarray
    var_b: np.ndarray
    n: np.ndarray
    chi2_red: np.ndarray

    def at(self, x: np.ndarray) -> np.ndarray:
        """The fitted line at x (one value per row, or (S, N) with x (S, N))."""
        if np.ndim(x) == 2:
            return self.a[:, None] + self.b[:, None] * (x - self.x0[:, None])
        return self.a + self.b * (x - self.x0)

    def var_at(self, x: np.ndarray) -> np.ndarray:
        """Variance of the fitted line's value at x (one per row)."""
        return self.var_a + (x - self.x0) ** 2 * self.var_b


def line_fit(x: np.ndarray, y: np.ndarray, w: np.ndarray, mask: np.ndarray) -> LineFit:
    """Weighted least-squares line through the masked points of each row (weights w = 1/sigma^2).

    Closed form of the normal equations from weighted sums, rows independent;
    rows with fewer than 2 points give NaN. The parameters' covariance is
    (X^T W X)^-1 (e.g. Bevington & Robinson, Data Reduction and Error
    Analysis, ch. 6).
    """
    W = np.where(mask, w, 0.0)
    yz = np.where(mask, y, 0.0)
    n = np.count_nonzero(mask, axis=1)
    Wx = W * x
    s0 = W.sum(axis=1)
    sx = Wx.sum(axis=1)
    sy = np.einsum("ij,ij->i", W, yz)
    sxx = np.einsum("ij,ij->i", Wx, x)
    sxy = np.einsum("ij,ij->i", Wx, yz)
    syy = np.einsum("ij,ij->i", W * yz, yz)
    with np.errstate(invalid="ignore", divide="ignore"):
        x0 = sx / s0
        a = sy / s0
        cxx = sxx - sx * x0
        cxy = sxy - sx * a
        cyy = syy - sy * a
        b = cxy / cxx
        chi2 = np.maximum(cyy - b * cxy, 0.0)
        dof = n - 2
        chi2_red = np.where(dof > 0, chi2 / np.maximum(dof, 1), np.nan)
        scale = np.where(np.isfinite(chi2_red), np.maximum(1.0, chi2_red), 1.0)
        var_a = scale / s0
        var_b = scale / cxx
    bad = n < 2
    if bad.any():
        for arr in (a, b, x0, var_a, var_b):
            arr[bad] = np.nan
    return LineFit(a=a, b=b, x0=x0, var_a=var_a, var_b=var_b, n=n, chi2_red=chi2_red)


def last_upward_crossing(x: np.ndarray, y: np.ndarray, upto: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Per row, the last place (before index ``upto``) where y goes from < 0 to >= 0: (x by linear
    interpolation, the index of the point before the crossing); NaN and -1 where there is none."""
    up = (y[:, :-1] < 0) & (y[:, 1:] >= 0)
    if upto is not None:
        up &= np.arange(up.shape[1])[None, :] < upto[:, None]
    m = up.shape[1]
    rev = up[:, ::-1]
    has = rev.any(axis=1)
    k = np.where(has, m - 1 - rev.argmax(axis=1), 0)
    rows = np.arange(len(k))
    y0, y1 = y[rows, k], y[rows, k + 1]
    x0, x1 = x[rows, k], x[rows, k + 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        xc = x0 + (x1 - x0) * (-y0) / (y1 - y0)
    return np.where(has, xc, np.nan), np.where(has, k, -1)


def take(a: np.ndarray, k: np.ndarray) -> np.ndarray:
    """a[row, k[row]] for every row (k clipped into range)."""
    kk = np.clip(k, 0, a.shape[1] - 1)
    return a[np.arange(a.shape[0]), kk]
