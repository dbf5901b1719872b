"""A short trend line drawn with the eight block heights, one cell per time bin, no widget state."""

from __future__ import annotations

import numpy as np
from rich.console import Console, ConsoleOptions, RenderResult
from rich.segment import Segment
from rich.style import Style

__all__ = ["trend_cells", "Trend"]

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


class Trend:
    """Rich renderable wrapper of :func:`trend_cells` in one style."""

    def __init__(self, values: np.ndarray, width: int, *, log: bool = False, style: str | Style = "") -> None:
        self.values = values
        self.width = width
        self.log = log
        self.style = style

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        width = min(self.width, options.max_width)
        yield Segment(trend_cells(self.values, width, log=self.log), console.get_style(self.style) if isinstance(self.style, str) and self.style else (self.style or None))
