"""Which part of the ne-Te plane the regime map shows: whole decades anchored on the envelope, robust to outliers."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["View", "choose_view", "DEFAULT_VIEW", "PERCENTILES", "MAX_REACH"]

PERCENTILES = (2.0, 98.0)
"""The span of accepted data the view must hold (our choice): a burst of outliers under 2 % of the trail
does not rescale the map; it is drawn as arrows at the edge."""

MAX_REACH = 1.0
"""Decades the view may reach beyond the envelope's box on each side to follow the data (our choice)."""

_PAD = 0.5     # decades of room around what must be seen


@dataclass(frozen=True)
class View:
    """The shown range: log10 of n_e (m^-3) across, log10 of T_e (eV) up; whole decades."""

    x0: float
    x1: float
    y0: float
    y1: float

    def holds(self, x: tuple[float, float], y: tuple[float, float]) -> bool:
        """True when both ranges (log10) lie inside with a quarter decade of room."""
        return (self.x0 <= x[0] - 0.25 and x[1] + 0.25 <= self.x1
                and self.y0 <= y[0] - 0.25 and y[1] + 0.25 <= self.y1)


DEFAULT_VIEW = View(14.0, 19.0, -1.0, 2.0)   # 1e8-1e13 cm^-3, 0.1-100 eV: laboratory discharges (common practice)


def _log_span(values: np.ndarray) -> tuple[float, float] | None:
    v = np.asarray(values, dtype=np.float64)
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return None
    lo, hi = np.percentile(np.log10(v), PERCENTILES)
    return float(lo), float(hi)


def _axis(anchor: tuple[float | None, float | None], data: tuple[float, float] | None,
          default: tuple[float, float]) -> tuple[tuple[float, float], tuple[float, float]]:
    """(shown whole-decade range, the range that must be seen) on one axis."""
    lo_b = math.log10(anchor[0]) if anchor[0] else None
    hi_b = math.log10(anchor[1]) if anchor[1] else None
    if lo_b is None and hi_b is None:
        need = data if data is not None else (default[0] + _PAD, default[1] - _PAD)
    else:
        lo = lo_b if lo_b is not None else (hi_b - 1.0 if hi_b is not None else 0.0)
        hi = hi_b if hi_b is not None else lo + 1.0
        need = (lo, hi)
        if data is not None:   # follow the data, at most MAX_REACH decades beyond the box
            need = (max(min(lo, data[0]), lo - MAX_REACH), min(max(hi, data[1]), hi + MAX_REACH))
    shown = (float(math.floor(need[0] - _PAD)), float(math.ceil(need[1] + _PAD)))
    if shown[1] - shown[0] < 2.0:
        shown = (shown[0] - 1.0, shown[1] + 1.0) if shown[1] - shown[0] < 1.0 else (shown[0], shown[1] + 1.0)
    return shown, need


def choose_view(box: tuple[float | None, float | None, float | None, float | None], trail_ne: np.ndarray,
                trail_te: np.ndarray, previous: View | None = None) -> View:
    """The view holding the envelope's box (ne lo, hi, Te lo, hi; m^-3 and eV) and the 2nd-98th percentile
    of the accepted trail, half a decade of room, whole decades. ``previous`` is kept while it still holds
    what must be seen and is not more than a decade too wide, so the map does not jump."""
    (x0, x1), need_x = _axis((box[0], box[1]), _log_span(trail_ne), (DEFAULT_VIEW.x0, DEFAULT_VIEW.x1))
    (y0, y1), need_y = _axis((box[2], box[3]), _log_span(trail_te), (DEFAULT_VIEW.y0, DEFAULT_VIEW.y1))
    new = View(x0, x1, y0, y1)
    if previous is not None and previous.holds(need_x, need_y):
        too_wide = (previous.x1 - previous.x0) - (x1 - x0) > 1.0 or (previous.y1 - previous.y0) - (y1 - y0) > 1.0
        if not too_wide:
            return previous
    return new
