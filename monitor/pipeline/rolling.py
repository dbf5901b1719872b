"""Rolling statistics (mean, std, min, max, least-squares slope) over a data-time window, and bounded trails.

The window of ``window`` seconds is cut into ``bins`` buckets of equal width
(aligned to multiples of the width in data time). Each bucket keeps, per
quantity, the count, min, max and the sums of t, t^2, x, x^2 and t*x, taken
relative to the bucket's start time and a reference value near the data
(the first value seen in the batch that opened it) so that large times
(epoch seconds) and large values (1e17 m^-3) lose no precision.
The statistics cover the buckets of the last ``bins`` bucket widths up to the
newest reading: the window is bucket-aligned, its resolution window/bins.
Memory is (quantities x bins) numbers, whatever the rate or the run length.
"""

from __future__ import annotations

import math
from typing import Mapping

import numpy as np

from monitor.snapshot import Stats

__all__ = ["Rolling", "Trail"]

_MOMENTS = ("st", "stt", "sx", "sxx", "stx")


class Rolling:
    """Bucketed rolling moments of many quantities; add whole arrays, read Stats."""

    def __init__(self, window: float = 10.0, bins: int = 200) -> None:
        if not window > 0 or bins < 1:
            raise ValueError("window must be positive and bins at least 1")
        self.window = float(window)
        self.nbins = int(bins)
        self.width = self.window / self.nbins
        self._names: list[str] = []
        self._index: dict[str, int] = {}
        self._bin_id = np.full(self.nbins, np.iinfo(np.int64).min, dtype=np.int64)
        self._last_bin: int | None = None
        q = 0
        self._n = np.zeros((q, self.nbins), dtype=np.int64)
        self._m = {k: np.zeros((q, self.nbins)) for k in _MOMENTS}
        self._ref = np.zeros((q, self.nbins))
        self._min = np.full((q, self.nbins), np.inf)
        self._max = np.full((q, self.nbins), -np.inf)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(self._names)

    def memory_cells(self) -> int:
        """Numbers held (for the bounded-memory check)."""
        return int(self._n.size * (3 + len(_MOMENTS)) + self._bin_id.size)

    def _grow(self, names: list[str]) -> None:
        new = [k for k in names if k not in self._index]
        if not new:
            return
        for k in new:
            self._index[k] = len(self._names)
            self._names.append(k)
        extra = len(new)
        self._n = np.vstack([self._n, np.zeros((extra, self.nbins), dtype=np.int64)])
        for k in _MOMENTS:
            self._m[k] = np.vstack([self._m[k], np.zeros((extra, self.nbins))])
        self._ref = np.vstack([self._ref, np.zeros((extra, self.nbins))])
        self._min = np.vstack([self._min, np.full((extra, self.nbins), np.inf)])
        self._max = np.vstack([self._max, np.full((extra, self.nbins), -np.inf)])

    def add(self, t: np.ndarray, values: Mapping[str, np.ndarray]) -> None:
        """Add readings at times ``t`` (non-decreasing); NaN/inf values are left out."""
        n = len(t)
        if n == 0 or not values:
            return
        names = list(values)
        self._grow(names)
        b = np.floor(t / self.width).astype(np.int64)
        if self._last_bin is not None and b[0] < self._last_bin:
            raise ValueError("rolling statistics need non-decreasing time")
        starts = np.concatenate(([0], np.flatnonzero(np.diff(b)) + 1))
        seg_bin = b[starts]
        cut = 0
        keep = seg_bin > seg_bin[-1] - self.nbins          # older buckets would be overwritten at once
        if not keep.all():
            first = int(np.flatnonzero(keep)[0])
            cut = int(starts[first])
            t, b = t[cut:], b[cut:]
            starts, seg_bin = starts[first:] - cut, seg_bin[first:]
            n = len(t)
        m = len(starts)
        lengths = np.diff(np.concatenate((starts, [n])))
        slots = seg_bin % self.nbins
        # buckets met for the first time are cleared; a continuing bucket keeps its reference
        cont = self._bin_id[slots] == seg_bin
        fresh_slots = slots[~cont]
        if len(fresh_slots):
            self._n[:, fresh_slots] = 0
            for k in _MOMENTS:
                self._m[k][:, fresh_slots] = 0.0
            self._min[:, fresh_slots] = np.inf
            self._max[:, fresh_slots] = -np.inf
            self._bin_id[fresh_slots] = seg_bin[~cont]
        # split the quantities into those with every value finite (no masks needed) and the rest;
        # each is taken relative to a reference value c (its first finite value in this batch)
        full: list[tuple[str, np.ndarray, float]] = []
        part: list[tuple[str, np.ndarray, float]] = []
        for name in names:
            col = np.asarray(values[name], dtype=np.float64)
            col = col[cut:] if cut else col
            if math.isfinite(float(np.add.reduce(col))):
                full.append((name, col, float(col[0])))
            else:
                fin = np.isfinite(col)
                i = int(fin.argmax())
                part.append((name, col, float(col[i]) if fin[i] else 0.0))
        dt = t - b * self.width                                  # in [0, width)
        for group, masked in ((full, False), (part, True)):
            if group:
                self._add_group(group, masked, dt, starts, lengths, slots)
        self._last_bin = int(seg_bin[-1])

    def _add_group(self, group: list[tuple[str, np.ndarray, float]], masked: bool, dt: np.ndarray,
                   starts: np.ndarray, lengths: np.ndarray, slots: np.ndarray) -> None:
        q, n = len(group), len(dt)
        rows = np.array([self._index[name] for name, _, _ in group])
        c = np.array([ref for _, _, ref in group])
        dx = np.empty((q, n))
        for i, (_, col, ref) in enumerate(group):
            np.subtract(col, ref, out=dx[i])
        if masked:
            fin = np.isfinite(dx)
            dx[~fin] = 0.0
            dtm = np.where(fin, dt, 0.0)
            cnt = np.add.reduceat(fin.astype(np.int64), starts, axis=1)
            st = np.add.reduceat(dtm, starts, axis=1)
            stt = np.add.reduceat(dtm * dt, starts, axis=1)
            stx = np.add.reduceat(dx * dt, starts, axis=1)
            mn = np.minimum.reduceat(np.where(fin, dx, np.inf), starts, axis=1)
            mx = np.maximum.reduceat(np.where(fin, dx, -np.inf), starts, axis=1)
        else:
            cnt = np.broadcast_to(lengths, (q, len(starts)))
            st = np.broadcast_to(np.add.reduceat(dt, starts), (q, len(starts)))
            stt = np.broadcast_to(np.add.reduceat(dt * dt, starts), (q, len(starts)))
            stx = np.add.reduceat(dx * dt, starts, axis=1)
            mn = np.minimum.reduceat(dx, starts, axis=1)
            mx = np.maximum.reduceat(dx, starts, axis=1)
        sx = np.add.reduceat(dx, starts, axis=1)
        sxx = np.add.reduceat(dx * dx, starts, axis=1)
        ix = np.ix_(rows, slots)
        old_n = self._n[ix]
        cc = c[:, None]
        ref = np.where(old_n > 0, self._ref[ix], cc)             # a bucket keeps its first reference
        e = cc - ref                                              # x - ref = (x - c) + e
        self._n[ix] = old_n + cnt
        self._m["st"][ix] += st
        self._m["stt"][ix] += stt
        self._m["sx"][ix] += sx + cnt * e
        self._m["sxx"][ix] += sxx + 2.0 * e * sx + cnt * e * e
        self._m["stx"][ix] += stx + e * st
        self._ref[ix] = ref
        self._min[ix] = np.minimum(self._min[ix], mn + cc)
        self._max[ix] = np.maximum(self._max[ix], mx + cc)

    def window_start(self) -> float | None:
        """Data time from which the current window counts readings."""
        if self._last_bin is None:
            return None
        return (self._last_bin - self.nbins + 1) * self.width

    def stats(self) -> dict[str, Stats]:
        """Stats of every quantity seen, over the current window."""
        out: dict[str, Stats] = {}
        if self._last_bin is None or not self._names:
            return out
        live = self._bin_id > self._last_bin - self.nbins
        slots = np.flatnonzero(live)
        n = self._n[:, slots].astype(np.float64)                        # (q, k)
        d = ((self._bin_id[slots] - self._last_bin) * self.width)[None, :]   # <= 0
        ref = self._ref[:, slots]
        total = n.sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            c = np.where(total > 0, (ref * n).sum(axis=1) / np.where(total > 0, total, 1), 0.0)[:, None]
            e = ref - c
            st, stt, sx, sxx, stx = (self._m[k][:, slots] for k in _MOMENTS)
            St = (st + n * d).sum(axis=1)
            Stt = (stt + 2 * d * st + n * d * d).sum(axis=1)
            Sx = (sx + n * e).sum(axis=1)
            Sxx = (sxx + 2 * e * sx + n * e * e).sum(axis=1)
            Stx = (stx + d * sx + e * st + n * d * e).sum(axis=1)
            mean_x = Sx / total
            var = Sxx / total - mean_x * mean_x
            den = Stt - St * St / total
            slope = (Stx - St * Sx / total) / den
        mn = self._min[:, slots].min(axis=1) if len(slots) else np.full(len(self._names), np.inf)
        mx = self._max[:, slots].max(axis=1) if len(slots) else np.full(len(self._names), -np.inf)
        for i, name in enumerate(self._names):
            k = int(total[i])
            if k == 0:
                out[name] = Stats(0, math.nan, math.nan, math.nan, math.nan, math.nan)
                continue
            sl = float(slope[i]) if k >= 2 and den[i] > 0 else math.nan
            out[name] = Stats(k, float(c[i, 0] + mean_x[i]), math.sqrt(max(float(var[i]), 0.0)),
                              float(mn[i]), float(mx[i]), sl)
        return out


class Trail:
    """Recent values for trends: one point per ``seconds/points`` of data time
    (the first reading of each interval), ``points`` long, a fixed ring."""

    def __init__(self, names: tuple[str, ...], seconds: float = 60.0, points: int = 600) -> None:
        self.points = int(points)
        self.dt = float(seconds) / self.points
        self._t = np.full(self.points, np.nan)
        self._v: dict[str, np.ndarray] = {k: np.full(self.points, np.nan) for k in names}
        self._pos = 0
        self._count = 0
        self._last_bucket: int | None = None

    def want(self, name: str) -> None:
        if name not in self._v:
            self._v[name] = np.full(self.points, np.nan)

    def add(self, t: np.ndarray, values: Mapping[str, np.ndarray]) -> None:
        if len(t) == 0:
            return
        bucket = np.floor(t / self.dt).astype(np.int64)
        new = np.empty(len(t), dtype=bool)
        new[0] = self._last_bucket is None or bucket[0] != self._last_bucket
        new[1:] = bucket[1:] != bucket[:-1]
        pick = np.flatnonzero(new)[-self.points:]
        self._last_bucket = int(bucket[-1])
        k = len(pick)
        if k == 0:
            return
        where = (self._pos + np.arange(k)) % self.points
        self._t[where] = t[pick]
        for name, ring in self._v.items():
            col = values.get(name)
            ring[where] = col[pick] if col is not None else np.nan
        self._pos = int((self._pos + k) % self.points)
        self._count = min(self._count + k, self.points)

    def arrays(self) -> tuple[np.ndarray, dict[str, np.ndarray]]:
        """Oldest-first copies of the times and of each named trail."""
        order = (self._pos - self._count + np.arange(self._count)) % self.points
        return self._t[order].copy(), {k: v[order].copy() for k, v in self._v.items()}
