"""Bad-quality diagnostic: share of invalid samples over a sliding data-time window, vectorised."""

from __future__ import annotations

from typing import Callable

import numpy as np

__all__ = ["QualityWindow"]


class QualityWindow:
    """Keeps the last ``window`` seconds of validity flags so the share is the same whatever the chunking.

    The share at sample i is (invalid samples with t in (t_i - window, t_i]) /
    (all samples in that interval). The condition is raised where the share
    exceeds ``above`` and at least ``min_samples`` are in the window, and
    returns where the share is below ``below``.
    """

    def __init__(self, window: float, above: float, below: float, min_samples: int) -> None:
        self.window = window
        self.above = above
        self.below = below
        self.min_samples = min_samples
        self._t = np.empty(0, dtype=np.float64)
        self._bad = np.empty(0, dtype=bool)

    def clear(self) -> None:
        """Forget the kept samples (time jumped)."""
        self._t = np.empty(0, dtype=np.float64)
        self._bad = np.empty(0, dtype=bool)

    def share(self, t: np.ndarray, bad: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(share, count) at each new sample, using the kept tail; updates the tail."""
        all_t = np.concatenate((self._t, t))
        all_bad = np.concatenate((self._bad, bad))
        m = len(self._t)
        cum = np.zeros(len(all_t) + 1, dtype=np.int64)
        np.cumsum(all_bad, out=cum[1:])
        idx = np.arange(m, len(all_t))
        lo = np.searchsorted(all_t, t - self.window, side="right")
        count = idx + 1 - lo
        share = (cum[idx + 1] - cum[lo]) / np.maximum(count, 1)
        self._keep(all_t, all_bad)
        return share, count

    def _keep(self, all_t: np.ndarray, all_bad: np.ndarray) -> None:
        cut = int(np.searchsorted(all_t, all_t[-1] - self.window, side="right")) if len(all_t) else 0
        self._t = all_t[cut:].copy()
        self._bad = all_bad[cut:].copy()

    def conditions(self, t: np.ndarray, bad: np.ndarray, active: bool
                   ) -> tuple[np.ndarray, Callable[[], np.ndarray], np.ndarray]:
        """(raise condition, return condition on demand, share) for the new samples."""
        if not active and not bad.any() and not self._bad.any():
            self._keep(np.concatenate((self._t, t)), np.concatenate((self._bad, bad)))
            zeros = np.zeros(len(t), dtype=np.float64)
            return np.zeros(len(t), dtype=bool), lambda: np.ones(len(t), dtype=bool), zeros
        share, count = self.share(t, bad)
        raise_c = (count >= self.min_samples) & (share > self.above)
        return raise_c, lambda: share < self.below, share
