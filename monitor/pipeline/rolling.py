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

# per quantity and bucket: count, sums of t, t^2, x, x^2, t*x (t and x relative to the bucket's
# start and reference), min and max of x
_N, _ST, _STT, _SX, _SXX, _STX, _MIN, _MAX = range(8)
_FRESH = np.array([0.0, 0.0, 0.0, 0.0, 0.0, 0.0, np.inf, -np.inf])
_GATHER = 2048          # readings gathered from small batches before they are added
_BLOCK = 8192           # readings added at a time from a large batch


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
        self._acc = np.zeros((0, 8, self.nbins))
        self._ref = np.zeros((0, self.nbins))
        self._all8 = np.arange(8)
        self._pending_t: list[np.ndarray] = []
        self._pending_v: list[Mapping[str, np.ndarray]] = []
        self._pending_n = 0

    @property
    def names(self) -> tuple[str, ...]:
        self.flush()
        return tuple(self._names)

    def memory_cells(self) -> int:
        """Numbers held (for the bounded-memory check; at most _GATHER readings wait besides)."""
        self.flush()
        return int(self._acc.size + self._ref.size + self._bin_id.size)

    def _grow(self, names: list[str]) -> None:
        new = [k for k in names if k not in self._index]
        if not new:
            return
        for k in new:
            self._index[k] = len(self._names)
            self._names.append(k)
        block = np.broadcast_to(_FRESH[None, :, None], (len(new), 8, self.nbins))
        self._acc = np.concatenate([self._acc, block], axis=0)
        self._ref = np.vstack([self._ref, np.zeros((len(new), self.nbins))])

    def add(self, t: np.ndarray, values: Mapping[str, np.ndarray]) -> None:
        """Add readings at times ``t`` (non-decreasing); NaN/inf values are left out.

        Small batches are gathered (up to ``_GATHER`` readings) and added together when
        enough have come or the statistics are read: the fixed cost is paid once."""
        n = len(t)
        if n == 0 or not values:
            return
        if self._last_bin is not None and np.floor(t[0] / self.width) < self._last_bin:
            raise ValueError("rolling statistics need non-decreasing time")
        if self._pending_t and np.floor(t[0] / self.width) < np.floor(self._pending_t[-1][-1] / self.width):
            raise ValueError("rolling statistics need non-decreasing time")
        if n >= _GATHER and not self._pending_t:
            for a in range(0, n, _BLOCK):          # cache-sized blocks: large batches stay fast
                b = min(n, a + _BLOCK)
                self._add(t[a:b], {k: v[a:b] for k, v in values.items()} if (a, b) != (0, n) else values)
            return
        self._pending_t.append(np.asarray(t, dtype=np.float64))
        self._pending_v.append(values)
        self._pending_n += n
        if self._pending_n >= _GATHER:
            self.flush()

    def flush(self) -> None:
        """Add the gathered small batches now."""
        if not self._pending_t:
            return
        ts, vs = self._pending_t, self._pending_v
        self._pending_t, self._pending_v, self._pending_n = [], [], 0
        if len(ts) == 1:
            self._add(ts[0], vs[0])
            return
        names: dict[str, None] = {}
        for v in vs:
            names.update(dict.fromkeys(v))
        t = np.concatenate(ts)
        joined = {k: np.concatenate([np.asarray(v[k], dtype=np.float64) if k in v else np.full(len(tt), np.nan)
                                     for tt, v in zip(ts, vs)]) for k in names}
        self._add(t, joined)

    def _add(self, t: np.ndarray, values: Mapping[str, np.ndarray]) -> None:
        n = len(t)
        names = list(values)
        self._grow(names)
        b = np.floor(t / self.width).astype(np.int64)
        if self._last_bin is not None and b[0] < self._last_bin:
            raise ValueError("rolling statistics need non-decreasing time")
        if b[0] == b[-1]:
            starts = np.zeros(1, dtype=np.int64)
        else:
            starts = np.concatenate(([0], np.flatnonzero(np.diff(b)) + 1))
        seg_bin = b[starts]
        cut = 0
        if seg_bin[0] <= seg_bin[-1] - self.nbins:          # older buckets would be overwritten at once
            first = int(np.flatnonzero(seg_bin > seg_bin[-1] - self.nbins)[0])
            cut = int(starts[first])
            t, b = t[cut:], b[cut:]
            starts, seg_bin = starts[first:] - cut, seg_bin[first:]
            n = len(t)
        lengths = np.diff(np.append(starts, n))
        slots = seg_bin % self.nbins
        # buckets met for the first time are cleared; a continuing bucket keeps its reference
        cont = self._bin_id[slots] == seg_bin
        if not cont.all():
            fresh_slots = slots[~cont]
            self._acc[:, :, fresh_slots] = _FRESH[None, :, None]
            self._bin_id[fresh_slots] = seg_bin[~cont]
        rows = np.fromiter((self._index[k] for k in names), dtype=np.int64, count=len(names))
        x = np.vstack([values[k] for k in names]).astype(np.float64, copy=False)     # (q, n)
        if cut:
            x = x[:, cut:]
        dt = t - b * self.width                                  # in [0, width)
        q, m = len(names), len(starts)
        new = np.empty((q, 8, m))
        with np.errstate(invalid="ignore", over="ignore"):
            # every quantity first as if all its values were finite, relative to its first value c
            c = x[:, 0].copy()
            dx = x - c[:, None]
            new[:, _SX] = np.add.reduceat(dx, starts, axis=1)
            full = np.isfinite(new[:, _SX]).all(axis=1)
            tmp = dx * dx
            new[:, _SXX] = np.add.reduceat(tmp, starts, axis=1)
            np.multiply(dx, dt, out=tmp)
            new[:, _STX] = np.add.reduceat(tmp, starts, axis=1)
            new[:, _MIN] = np.minimum.reduceat(dx, starts, axis=1)
            new[:, _MAX] = np.maximum.reduceat(dx, starts, axis=1)
            new[:, _N] = lengths
            tsum = np.add.reduceat(np.stack((dt, dt * dt)), starts, axis=1)      # (2, m)
            new[:, _ST] = tsum[0]
            new[:, _STT] = tsum[1]
            if not full.all():
                # the quantities with missing or non-finite values again, masked
                part = np.flatnonzero(~full)
                xp = x[part]
                fin = np.isfinite(xp)
                cp = xp[np.arange(len(part)), fin.argmax(axis=1)]
                cp = np.where(np.isfinite(cp), cp, 0.0)
                c[part] = cp
                d = np.where(fin, xp - cp[:, None], 0.0)
                dtm = np.where(fin, dt, 0.0)
                y = np.stack((fin.astype(np.float64), dtm, dtm * dt, d, d * d, d * dt), axis=1)   # (p, 6, n)
                ys = np.add.reduceat(y, starts, axis=2)
                new[part, _N], new[part, _ST], new[part, _STT] = ys[:, 0], ys[:, 1], ys[:, 2]
                new[part, _SX], new[part, _SXX], new[part, _STX] = ys[:, 3], ys[:, 4], ys[:, 5]
                new[part, _MIN] = np.minimum.reduceat(np.where(fin, d, np.inf), starts, axis=1)
                new[part, _MAX] = np.maximum.reduceat(np.where(fin, d, -np.inf), starts, axis=1)
        self._merge(rows, new, c, slots)
        self._last_bin = int(seg_bin[-1])

    def _merge(self, rows: np.ndarray, new: np.ndarray, c: np.ndarray, slots: np.ndarray) -> None:
        """Add per-bucket sums ``new`` (quantities x 8 x buckets, relative to references ``c``)
        into the accumulators of ``slots``, shifting them onto each bucket's own reference."""
        ix = np.ix_(rows, self._all8, slots)
        old = self._acc[ix]                                                      # (q, 8, m)
        rix = np.ix_(rows, slots)
        cc = c[:, None]
        ref = np.where(old[:, _N] > 0, self._ref[rix], cc)        # a bucket keeps its first reference
        e = cc - ref                                              # x - ref = (x - c) + e
        cnt, st, sx = new[:, _N], new[:, _ST], new[:, _SX]
        old[:, _N] += cnt
        old[:, _ST] += st
        old[:, _STT] += new[:, _STT]
        old[:, _SX] += sx + cnt * e
        old[:, _SXX] += new[:, _SXX] + 2.0 * e * sx + cnt * e * e
        old[:, _STX] += new[:, _STX] + e * st
        np.minimum(old[:, _MIN], new[:, _MIN] + cc, out=old[:, _MIN])
        np.maximum(old[:, _MAX], new[:, _MAX] + cc, out=old[:, _MAX])
        self._acc[ix] = old
        self._ref[rix] = ref

    def window_start(self) -> float | None:
        """Data time from which the current window counts readings."""
        self.flush()
        if self._last_bin is None:
            return None
        return (self._last_bin - self.nbins + 1) * self.width

    def stats(self) -> dict[str, Stats]:
        """Stats of every quantity seen, over the current window."""
        self.flush()
        out: dict[str, Stats] = {}
        if self._last_bin is None or not self._names:
            return out
        slots = np.flatnonzero(self._bin_id > self._last_bin - self.nbins)
        a = self._acc[:, :, slots]                                          # (q, 8, k)
        n = a[:, _N]
        d = ((self._bin_id[slots] - self._last_bin) * self.width)[None, :]   # <= 0
        ref = self._ref[:, slots]
        total = n.sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            c = np.where(total > 0, (ref * n).sum(axis=1) / np.where(total > 0, total, 1), 0.0)[:, None]
            e = ref - c
            st, stt, sx, sxx, stx = a[:, _ST], a[:, _STT], a[:, _SX], a[:, _SXX], a[:, _STX]
            St = (st + n * d).sum(axis=1)
            Stt = (stt + 2 * d * st + n * d * d).sum(axis=1)
            Sx = (sx + n * e).sum(axis=1)
            Sxx = (sxx + 2 * e * sx + n * e * e).sum(axis=1)
            Stx = (stx + d * sx + e * st + n * d * e).sum(axis=1)
            mean_x = Sx / total
            var = Sxx / total - mean_x * mean_x
            den = Stt - St * St / total
            slope = (Stx - St * Sx / total) / den
        mn = a[:, _MIN].min(axis=1) if len(slots) else np.full(len(self._names), np.inf)
        mx = a[:, _MAX].max(axis=1) if len(slots) else np.full(len(self._names), -np.inf)
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
