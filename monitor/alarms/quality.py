"""Bad-quality diagnostic: share of invalid samples over a sliding data-time window, vectorised."""

from __future__ import annotations

from collections import deque
from typing import Callable

import numpy as np

__all__ = ["QualityWindow"]


class QualityWindow:
    """Keeps the last ``window`` seconds of validity flags so the share is the same whatever the chunking.

    The share at sample i is (invalid samples with t in (t_i - window, t_i]) /
    (all samples in that interval). The condition is raised where the share
    exceeds ``above`` and at least ``min_samples`` are in the window, and
    returns where the share is below ``below``. The kept samples are held as
    the frames they came in and joined only when a share must be computed.
    """

    def __init__(self, window: float, above: float, below: float, min_samples: int) -> None:
        self.window = window
        self.above = above
        self.below = below
        self.min_samples = min_samples
        self._chunks: deque[tuple[np.ndarray, np.ndarray, int]] = deque()   # (t, bad, number bad)
        self._bad_kept = 0

    def clear(self) -> None:
        """Forget the kept samples (time jumped)."""
        self._chunks.clear()
        self._bad_kept = 0

    def _add(self, t: np.ndarray, bad: np.ndarray, nbad: int) -> None:
        self._chunks.append((t, bad, nbad))
        self._bad_kept += nbad
        edge = float(t[-1]) - self.window
        while self._chunks and float(self._chunks[0][0][-1]) <= edge:
            self._bad_kept -= self._chunks.popleft()[2]

    def share(self, t: np.ndarray, bad: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(share, count) at each new sample, using the kept samples; then keeps these too."""
        kept_t = [c[0] for c in self._chunks]
        kept_bad = [c[1] for c in self._chunks]
        all_t = np.concatenate((*kept_t, t))
        all_bad = np.concatenate((*kept_bad, bad))
        m = len(all_t) - len(t)
        cum = np.zeros(len(all_t) + 1, dtype=np.int64)
        np.cumsum(all_bad, out=cum[1:])
        idx = np.arange(m, len(all_t))
        lo = np.searchsorted(all_t, t - self.window, side="right")
        count = idx + 1 - lo
        share = (cum[idx + 1] - cum[lo]) / np.maximum(count, 1)
        self._add(t.copy(), bad.copy(), int(cum[-1] - cum[m]))
        return share, count

    def conditions(self, t: np.ndarray, bad: np.ndarray, active: bool
                   ) -> tuple[np.ndarray, Callable[[], np.ndarray], np.ndarray]:
        """(raise condition, return condition on demand, share) for the new samples."""
        nbad = int(np.count_nonzero(bad))
        if not active and nbad == 0 and self._bad_kept == 0:
            self._add(t.copy(), bad.copy(), 0)
            return np.zeros(len(t), dtype=bool), lambda: np.ones(len(t), dtype=bool), np.zeros(len(t))
        share, count = self.share(t, bad)
        raise_c = (count >= self.min_samples) & (share > self.above)
        return raise_c, lambda: share < self.below, share
