"""The recorder's memory between shots: the pre-trigger rows and the last reading of each channel (for priming)."""

from __future__ import annotations

import collections
from typing import Callable, Mapping

import numpy as np

from monitor.recording.csvformat import BASE_ORDER

__all__ = ["PreTrigger", "Rows"]

Rows = tuple[np.ndarray, dict[str, np.ndarray], "np.ndarray | None"]     # t, columns, seq


class PreTrigger:
    """Keeps the last ``seconds`` of rows seen between shots and, for each base channel, the last
    reading that left that window, so a new shot can start with its pre-trigger margin and with
    "priming" rows: the last reading of a channel the shot's first row lacks, while the alignment
    hold (``hold(key)``, s) still covers that row. Then a replay of the shot aligns as live did."""

    def __init__(self, seconds: float, hold: Callable[[str], float]) -> None:
        self.seconds = float(seconds)
        self._hold = hold
        self._rows: collections.deque[Rows] = collections.deque()
        self._last: dict[str, tuple[float, dict[str, float]]] = {}

    def keep(self, t: np.ndarray, columns: dict[str, np.ndarray], seq: np.ndarray | None) -> None:
        """Rows between shots, in time order."""
        if len(t) == 0:
            return
        if self.seconds <= 0:
            self._remember(t, columns)
            return
        self._rows.append((t, columns, seq))
        self._trim(float(t[-1]) - self.seconds)

    def take(self, trigger_t: float, trigger_row: Mapping[str, float]) -> tuple[float, list[tuple[float, dict[str, float]]], list[Rows]]:
        """At a trigger: (time of the shot's first row, priming rows, the pre-trigger rows); forgets them."""
        self._trim(trigger_t - self.seconds)
        rows = list(self._rows)
        self._rows.clear()
        if rows:
            first_t = float(rows[0][0][0])
            first = {k: float(v[0]) for k, v in rows[0][1].items()}
        else:
            first_t, first = trigger_t, dict(trigger_row)
        primes: dict[float, dict[str, float]] = {}
        for key, (t, row) in self._last.items():
            carried = first.get(key)
            if carried is not None and np.isfinite(carried):
                continue
            if t < first_t and first_t - t <= self._hold(key):
                primes[t] = row
        self._last = {}
        return first_t, sorted(primes.items()), rows

    def _trim(self, keep_from: float) -> None:
        while self._rows and float(self._rows[0][0][-1]) < keep_from:
            t, cols, _ = self._rows.popleft()
            self._remember(t, cols)
        if self._rows:
            t, cols, seq = self._rows[0]
            k = int(np.searchsorted(t, keep_from, side="left"))
            if k:
                self._remember(t[:k], {c: v[:k] for c, v in cols.items()})
                self._rows[0] = (t[k:], {c: v[k:] for c, v in cols.items()}, seq[k:] if seq is not None else None)

    def _remember(self, t: np.ndarray, cols: Mapping[str, np.ndarray]) -> None:
        for key in BASE_ORDER:
            v = cols.get(key)
            if v is None or len(v) == 0:
                continue
            idx = np.flatnonzero(np.isfinite(v))
            if len(idx):
                i = int(idx[-1])
                self._last[key] = (float(t[i]), {c: float(x[i]) for c, x in cols.items()})
