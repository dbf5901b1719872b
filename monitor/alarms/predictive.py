"""Predictive warning: a least-squares slope over a data-time window, evaluated on a fixed time grid."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Prediction", "SlopePredictor"]

# The warning returns only when the predicted crossing is this much beyond the horizon (hysteresis).
RETURN_FACTOR = 1.25
_MIN_SAMPLES = 3


@dataclass(frozen=True)
class Prediction:
    """One grid point: fitted value and slope, the limit approached and when it will be reached."""

    time: float
    value: float
    slope: float
    limit: float | None
    predicted_time: float | None   # None: not approaching a limit


class SlopePredictor:
    """Fits value = a + b (t - g) over (g - window, g] at grid points g = k * step.

    A grid point is evaluated once a sample at or after it has arrived, from
    exactly the samples in its window, so the result does not depend on how
    the data were chunked. It warns (raise) when a limit will be reached
    within ``horizon`` seconds, and returns when the crossing is more than
    RETURN_FACTOR * horizon away, no longer approached, or already reached
    (the limit alarm itself then takes over).
    """

    def __init__(self, high: float | None, low: float | None, horizon: float, window: float, step: float) -> None:
        self.high, self.low = high, low
        self.horizon, self.window, self.step = horizon, window, step
        self.active = False
        self.reset()

    def reset(self) -> None:
        """Start afresh (discharge off): no samples kept, warning not active."""
        self.restart()
        self.active = False

    def restart(self) -> None:
        """Drop the kept samples and the grid position (time jumped); the warning state stays."""
        self._t = np.empty(0, dtype=np.float64)
        self._v = np.empty(0, dtype=np.float64)
        self._pending: list[tuple[np.ndarray, np.ndarray]] = []
        self._last_k: int | None = None

    def _predict(self, g: float, b: float, vg: float) -> Prediction:
        best: tuple[float, float] | None = None
        if self.high is not None and b > 0 and vg < self.high:
            best = ((self.high - vg) / b, self.high)
        if self.low is not None and b < 0 and vg > self.low:
            ttl = (self.low - vg) / b
            if best is None or ttl < best[0]:
                best = (ttl, self.low)
        if best is None:
            return Prediction(g, vg, b, None, None)
        return Prediction(g, vg, b, best[1], g + best[0])

    def evaluate(self, t: np.ndarray, v: np.ndarray, start: float, upto: float) -> list[tuple[Prediction, bool]]:
        """Grid points in (last evaluated, ``upto``] with these (evaluable, time-ordered) samples added,
        and where the warning toggles. ``upto`` is the time of the latest sample seen, valid or not;
        ``start`` the first time of the stretch being evaluated (used after a reset)."""
        step = self.step
        k_end = math.floor(upto / step + 1e-9)
        if self._last_k is None:    # a fresh stretch: its first grid point is the first at or after start
            self._last_k = math.ceil(start / step - 1e-9) - 1
        k0 = self._last_k + 1
        if k_end < k0:              # nothing due: keep the samples for later, join nothing now
            if len(t):
                self._pending.append((t.copy(), v.copy()))
            return []
        if self._pending:
            self._t = np.concatenate((self._t, *(p[0] for p in self._pending)))
            self._v = np.concatenate((self._v, *(p[1] for p in self._pending)))
            self._pending.clear()
        prev_last = float(self._t[-1]) if len(self._t) else None
        all_t = np.concatenate((self._t, t)) if len(t) else self._t
        all_v = np.concatenate((self._v, v)) if len(t) else self._v
        ks = []
        if k_end >= k0:
            self._last_k = k_end
            if prev_last is not None:   # points whose window still holds kept samples
                ks.append(np.arange(k0, min(k_end, math.floor((prev_last + self.window) / step) + 1) + 1))
            if len(t):
                ks.append(np.arange(max(k0, math.ceil(float(t[0]) / step - 1e-9)), k_end + 1))
        k_all = np.unique(np.concatenate(ks)) if ks else np.empty(0, dtype=np.int64)
        out: list[tuple[Prediction, bool]] = []
        if k_all.size and len(all_t):
            g_all = k_all * step
            lo_all = np.searchsorted(all_t, g_all - self.window, side="right")
            hi_all = np.searchsorted(all_t, g_all, side="right")
            for j in np.flatnonzero(hi_all - lo_all >= _MIN_SAMPLES):
                g = float(g_all[j])
                x = all_t[lo_all[j]:hi_all[j]] - g
                y = all_v[lo_all[j]:hi_all[j]]
                dx = x - x.mean()
                sxx = float(np.sum(dx * dx))
                if sxx <= 0.0:
                    continue
                ym = float(y.mean())
                b = float(np.sum(dx * (y - ym))) / sxx
                p = self._predict(g, b, ym - b * float(x.mean()))
                ttl = None if p.predicted_time is None else p.predicted_time - g
                if not self.active and ttl is not None and ttl <= self.horizon:
                    self.active = True
                    out.append((p, True))
                elif self.active and (ttl is None or ttl > RETURN_FACTOR * self.horizon):
                    self.active = False
                    out.append((p, False))
        if len(all_t):
            cut = int(np.searchsorted(all_t, all_t[-1] - self.window, side="right"))
            self._t, self._v = all_t[cut:].copy(), all_v[cut:].copy()
        return out
