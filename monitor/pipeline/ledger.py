"""The ledger of one run: every reading that entered, counted once as accepted, rejected (by reason) or lost."""

from __future__ import annotations

import collections
from dataclasses import dataclass, field
from typing import Iterable

import numpy as np

from adapters.batch import Rejection
from monitor.snapshot import SourceCounts

__all__ = ["Ledger", "SourceLedger", "Tally"]

_RATE_SPAN = 2.0      # s of data time over which the reading rate is measured
_RATE_BUCKET = 0.1
_KEEP_REFUSED = 100_000     # seq spans of refused inputs remembered until their gap is seen


@dataclass
class Tally:
    """What processing one batch found, committed to the ledger only once the batch is done
    (a batch whose processing failed is refused whole, and nothing of it was counted before)."""

    accepted: int = 0
    lost: int = 0
    restarts: int = 0
    rejected: collections.Counter[str] = field(default_factory=collections.Counter)
    unknown: collections.Counter[str] = field(default_factory=collections.Counter)
    accepted_t: list[np.ndarray] = field(default_factory=list)


@dataclass
class SourceLedger:
    """The counts of one source, and the seq spans of inputs its adapter refused (so that the gap
    they leave is not counted once more as lost)."""

    accepted: int = 0
    rejected: collections.Counter[str] = field(default_factory=collections.Counter)
    lost: int = 0
    unknown: collections.Counter[str] = field(default_factory=collections.Counter)
    restarts: int = 0
    last_data_time: float | None = None
    last_wall_time: float | None = None
    first_time: float | None = None
    rate_buckets: dict[int, int] = field(default_factory=dict)
    refused_seqs: collections.deque[tuple[int, int]] = field(
        default_factory=lambda: collections.deque(maxlen=_KEEP_REFUSED))

    def commit(self, tally: Tally) -> None:
        self.accepted += tally.accepted
        self.lost += tally.lost
        self.restarts += tally.restarts
        self.rejected.update(tally.rejected)
        self.unknown.update(tally.unknown)
        for t in tally.accepted_t:
            if len(t):
                self.last_data_time = float(t[-1])
                if self.first_time is None:
                    self.first_time = float(t[0])
                self._add_rate(t)

    def refused_in_gaps(self, gap_lo: np.ndarray | None, gap_hi: np.ndarray | None, last_seq: int | None) -> int:
        """How many seq numbers in a batch's gaps (each gap holds gap_lo + 1 .. gap_hi - 1) belong to
        inputs an adapter refused (received, so rejected, not lost); forgets those and older ones."""
        if not self.refused_seqs:
            return 0
        found = 0
        spans = np.array(self.refused_seqs, dtype=np.int64).reshape(-1, 2)
        if gap_lo is not None and gap_hi is not None and len(gap_lo):
            # a seq refused twice (a duplicate) still fills one gap position only: the union of the spans
            a, b = _union(spans[:, 0], spans[:, 1])
            found = int((_covered(a, b, gap_hi) - _covered(a, b, gap_lo + 1)).sum())
        if last_seq is not None:
            keep = spans[spans[:, 1] > last_seq + 1]
            if len(keep) != len(spans):
                self.refused_seqs.clear()
                self.refused_seqs.extend((int(x), int(y)) for x, y in keep.tolist())
        return found

    def _add_rate(self, t: np.ndarray) -> None:
        first, newest = int(t[0] // _RATE_BUCKET), int(t[-1] // _RATE_BUCKET)
        if first == newest:                      # the usual small batch: one bucket
            self.rate_buckets[newest] = self.rate_buckets.get(newest, 0) + len(t)
        else:
            b = np.floor(t / _RATE_BUCKET).astype(np.int64)
            starts = np.concatenate(([0], np.flatnonzero(np.diff(b)) + 1))
            counts = np.diff(np.concatenate((starts, [len(b)])))
            for key, c in zip(b[starts][-64:].tolist(), counts[-64:].tolist()):
                self.rate_buckets[key] = self.rate_buckets.get(key, 0) + c
        for key in [k for k in self.rate_buckets if k <= newest - _RATE_SPAN / _RATE_BUCKET]:
            del self.rate_buckets[key]

    def rate(self) -> float:
        if not self.rate_buckets or self.last_data_time is None or self.first_time is None:
            return 0.0
        span = min(_RATE_SPAN, self.last_data_time - self.first_time)
        if span <= 0:
            return 0.0
        return sum(self.rate_buckets.values()) / max(span, _RATE_BUCKET)

    def freeze(self) -> SourceCounts:
        return SourceCounts(accepted=self.accepted, rejected=dict(self.rejected), lost=self.lost,
                            unknown_keys=dict(self.unknown), rate=self.rate(),
                            last_data_time=self.last_data_time, last_wall_time=self.last_wall_time)


class Ledger:
    """Per-source ledgers. A rejection made by an adapter counts as the ``count`` readings it stands
    for, and the seq numbers it covered (``seq_first``..``seq_last``, as the adapter read them) are
    remembered so that their gap is not counted again as lost."""

    def __init__(self) -> None:
        self._sources: dict[str, SourceLedger] = {}

    def of(self, source: str) -> SourceLedger:
        led = self._sources.get(source)
        if led is None:
            led = self._sources[source] = SourceLedger()
        return led

    def refused(self, rejections: Iterable[Rejection]) -> None:
        for r in rejections:
            led = self.of(r.source)
            led.rejected[r.reason] += max(1, int(r.count))
            if r.seq_first is not None:
                last = r.seq_last if r.seq_last is not None else r.seq_first
                if last >= r.seq_first:
                    led.refused_seqs.append((int(r.seq_first), int(last) + 1))

    def counts(self) -> dict[str, SourceCounts]:
        return {name: led.freeze() for name, led in self._sources.items()}

    def restarts(self) -> dict[str, int]:
        return {name: led.restarts for name, led in self._sources.items()}


def _union(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The union of the spans [lo, hi) as sorted, disjoint spans."""
    order = np.argsort(lo, kind="stable")
    lo, hi = lo[order], hi[order]
    new = np.ones(len(lo), dtype=bool)
    new[1:] = lo[1:] > np.maximum.accumulate(hi)[:-1]
    starts = np.flatnonzero(new)
    return lo[starts], np.maximum.reduceat(hi, starts)


def _covered(a: np.ndarray, b: np.ndarray, x: np.ndarray) -> np.ndarray:
    """For each x, how many integers below it lie in the sorted, disjoint spans [a, b)."""
    before = np.concatenate(([0], np.cumsum(b - a)))
    i = np.searchsorted(a, x, side="left")          # spans that start below x
    j = np.maximum(i - 1, 0)
    result: np.ndarray = np.where(i > 0, before[j] + np.minimum(x, b[j]) - a[j], 0)
    return result
