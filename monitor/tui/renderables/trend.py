"""A short trend line drawn with the eight block heights, one cell per time bin, no widget state."""

from __future__ import annotations

import numpy as np

__all__ = ["trend_cells"]

_BLOCKS = " ▁▂▃▄▅▆▇█"


def trend_cells(values: np.ndarray, width: int, *, log: bool = False) -> str:
    """``width`` characters: the last values binned (mean per bin) and scaled min..max.

    NaN bins print as a blank; a flat series prints at mid height. With
    ``log`` the values are scaled logarithmically (densities over decades).
    """
    if width <= 0:
        return ""
    v = np.asarray(values, dtype=np.float64)
    if log:
        with np.errstate(divide="ignore", invalid="ignore"):
            v = np.where(v > 0, np.log10(np.where(v > 0, v, 1.0)), np.nan)
    if v.size == 0:
        return " " * width
    edges = np.linspace(0, v.size, min(width, v.size) + 1).astype(np.int64)
    finite = np.isfinite(v)
    csum = np.concatenate(([0.0], np.cumsum(np.where(finite, v, 0.0))))
    ccount = np.concatenate(([0], np.cumsum(finite)))
    counts = ccount[edges[1:]] - ccount[edges[:-1]]
    with np.errstate(invalid="ignore", divide="ignore"):
        means = (csum[edges[1:]] - csum[edges[:-1]]) / counts
    ok = counts > 0
    if not ok.any():
        return " " * width
    lo, hi = float(np.min(means[ok])), float(np.max(means[ok]))
    if hi - lo <= 1e-12 * max(1.0, abs(hi)):
        levels = np.where(ok, 4, 0)
    else:
        levels = np.where(ok, 1 + np.clip(((means - lo) / (hi - lo) * 7.0).round(), 0, 7), 0)
    text = "".join(_BLOCKS[int(k)] for k in np.nan_to_num(levels, nan=0.0))
    return text.rjust(width)
