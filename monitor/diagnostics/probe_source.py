"""ProbeSweepSource: a Source reading probe sweeps (a sweep file at a pace, or `sim:probe`) and yielding readings.

Each poll analyses the sweeps that came due, all in one call per sweep
length, and yields one Batch of readings at the sweeps' times: columns
``ne``, ``Te`` (canonical keys, so the pipeline maps them unchanged) and
``Vf``, ``Vp``, ``I_sat``, ``ni`` (extra channels), each with its per-sample
sigma, ``seq`` = the sweep id, and ``probe_doubtful`` (1.0 for a doubtful
sweep, 0.0 for an accepted one) for a data-quality rule to honour. A
rejected sweep becomes a Rejection with its reason token, its bias and
current kept as a JSON frame (first KEEP_RAW bytes, as every rejection).
"""

from __future__ import annotations

import json
import math
import threading
import time
from pathlib import Path

import numpy as np

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus
from adapters.batch import Batch, Rejection
from adapters.framing import reject
from adapters.sweeps import SweepBlock
from monitor.diagnostics.probe import ProbeResults, analyse_sweeps
from monitor.diagnostics.probe_file import read_sweeps
from monitor.diagnostics.probe_model import SCENARIO_PROBE, scenario_sweeps
from monitor.diagnostics.probe_spec import ProbeSpec

__all__ = ["ProbeSweepSource", "readings", "COLUMNS"]

COLUMNS = ("ne", "Te", "Vf", "Vp", "I_sat", "ni")
MAX_SWEEPS_PER_POLL = 4096


def readings(source: str, results: ProbeResults, block: SweepBlock, rows: np.ndarray,
             received: float, t_offset: float = 0.0) -> tuple[Batch | None, list[Rejection]]:
    """The Batch of accepted and doubtful sweeps, and a Rejection per rejected sweep."""
    keep = results.quality != "rejected"
    rejections = []
    for k in np.flatnonzero(~keep):               # one record per refused sweep (rare), not per point
        r = int(rows[k])
        raw = json.dumps({"sweep": int(results.sweep[k]), "t": float(results.t[k]),
                          "V": block.V[r].tolist(), "I": block.I[r].tolist()}).encode()
        sweep = int(results.sweep[k])
        rejections.append(reject(source, str(results.reason[k]), raw, received,
                                 f"probe sweep {sweep} (seq={sweep})", seq=(sweep, sweep)))
    if not keep.any():
        return None, rejections
    cols = {key: results[key][keep] for key in COLUMNS}
    cols["probe_doubtful"] = (results.quality[keep] == "doubtful").astype(np.float64)
    sigma = {key: results[f"sigma_{key}"][keep] for key in COLUMNS}
    batch = Batch(source=source, t=results.t[keep] + t_offset, columns=cols, sigma=sigma,
                  seq=results.sweep[keep].astype(np.int64), t_from_source=True,
                  auxiliary=frozenset(cols) - {"ne", "Te"})      # the sweep's other results, for information
    return batch, rejections


class ProbeSweepSource:
    """Sweeps as readings. ``path`` a sweep file (CSV, JSON lines or text lines) played in its data
    time at ``speed`` x real time (None: as fast as possible); ``path=None`` is `sim:probe`: our
    forward model's scenario at ``rate`` sweeps/s of ``points`` points, ``duration`` s (None: forever),
    times offset by the wall clock at open (``epoch``). ``probe`` None: the scenario's probe
    (SCENARIO_PROBE) for sim:probe, the ProbeSpec defaults for a file."""

    def __init__(self, path: str | Path | None, *, probe: ProbeSpec | None = None, speed: float | None = 1.0,
                 rate: float = 20.0, points: int = 250, seed: int = 0, duration: float | None = None,
                 name: str | None = None, epoch: float | None = None, noise: float = 0.01) -> None:
        if speed is not None and not (speed > 0 and math.isfinite(speed)):
            raise FatalSourceError(f"speed must be positive, got {speed}")
        if not (rate > 0 and math.isfinite(rate)) or points < 20:
            raise FatalSourceError(f"rate must be positive and points >= 20, got {rate}, {points}")
        self.path = Path(path) if path is not None else None
        self.name = name or (self.path.name if self.path is not None else "sim:probe")
        self.spec = probe or (SCENARIO_PROBE if path is None else ProbeSpec())
        self.speed, self.rate, self.points, self.seed, self.noise = speed, rate, points, seed, noise
        self._total = None if duration is None else int(round(duration * rate))
        self._epoch_arg = epoch
        self._epoch = 0.0
        self._state = LinkState.CONNECTING
        self._closed = threading.Event()
        self._wall0 = 0.0
        self._k = 0                                   # sweeps handed out
        self._blocks: list[SweepBlock] = []
        self._pending: list[Rejection] = []
        self._order = np.empty(0, dtype=np.int64)     # file mode: sweeps by time -> (block, row)
        self._blk = np.empty(0, dtype=np.int64)
        self._times = np.empty(0)
        self.counts = {"sweeps": 0, "accepted": 0, "doubtful": 0, "rejected": 0}

    def open(self) -> None:
        if self.path is not None:
            try:
                data = self.path.read_bytes()
            except OSError as exc:
                raise FatalSourceError(f"{self.path}: cannot read: {exc.strerror or exc}") from None
            self._blocks, self._pending = read_sweeps(data, self.name)
            blk = np.concatenate([np.full(len(b), i) for i, b in enumerate(self._blocks)] or [np.empty(0, int)])
            row = np.concatenate([np.arange(len(b)) for b in self._blocks] or [np.empty(0, int)])
            times = np.concatenate([b.t for b in self._blocks] or [np.empty(0)])
            order = np.argsort(times, kind="stable")
            self._blk, self._order, self._times = blk[order], row[order], times[order]
            self._total = len(order)
        self._epoch = time.time() if self._epoch_arg is None else self._epoch_arg
        self._wall0 = time.monotonic()
        self._state = LinkState.CONNECTED

    def status(self) -> SourceStatus:
        c = self.counts
        msg = (f"{c['sweeps']} sweeps: {c['accepted']} accepted, {c['doubtful']} doubtful, "
               f"{c['rejected']} rejected")
        return SourceStatus(self.name, self._state, msg)

    def _due(self, timeout: float) -> int:
        end = self._total if self._total is not None else 2**62
        if self.speed is None:
            return min(end, self._k + MAX_SWEEPS_PER_POLL)
        elapsed = (time.monotonic() - self._wall0) * self.speed
        if self.path is not None:
            t0 = self._times[0] if len(self._times) else 0.0
            due = int(np.searchsorted(self._times, t0 + elapsed, side="right"))
            if due <= self._k and self._k < end:
                wait = (self._times[self._k] - t0 - elapsed) / self.speed
                self._closed.wait(max(0.0, min(timeout, wait)))
                elapsed = (time.monotonic() - self._wall0) * self.speed
                due = int(np.searchsorted(self._times, t0 + elapsed, side="right"))
        else:
            due = int(elapsed * self.rate)
            if due <= self._k:
                self._closed.wait(max(0.0, min(timeout, (self._k + 1) / self.rate - elapsed) / self.speed))
                due = int((time.monotonic() - self._wall0) * self.speed * self.rate)
        return min(end, due, self._k + MAX_SWEEPS_PER_POLL)

    def poll(self, timeout: float) -> Polled:
        if self._state is LinkState.CONNECTING:
            self.open()
        if self._state is not LinkState.CONNECTED:
            return Polled(status=self.status())
        received = time.time()
        rejections, self._pending = self._pending, []
        batches: list[Batch] = []
        k1 = self._due(timeout)
        if k1 > self._k:
            for block, rows, offset in self._take(self._k, k1):
                res = analyse_sweeps(block.V[rows], block.I[rows], self.spec, sweep=block.sweep[rows],
                                     t=block.t[rows])
                for q in ("accepted", "doubtful", "rejected"):
                    self.counts[q] += int(np.count_nonzero(res.quality == q))
                self.counts["sweeps"] += len(res)
                batch, refused = readings(self.name, res, block, rows, received, offset)
                rejections += refused
                if batch is not None:
                    batches.append(batch)
            self._k = k1
        if self._total is not None and self._k >= self._total:
            self._state = LinkState.ENDED
        return Polled(batches=batches, rejections=rejections, status=self.status())

    def _take(self, k0: int, k1: int) -> list[tuple[SweepBlock, np.ndarray, float]]:
        if self.path is None:
            ids, t, V, I = scenario_sweeps(k0, k1, spec=self.spec, seed=self.seed, points=self.points,
                                           rate=self.rate, noise=self.noise)
            return [(SweepBlock(self.name, ids, t, V, I), np.arange(len(ids)), self._epoch)]
        out = []
        blk, row = self._blk[k0:k1], self._order[k0:k1]
        for b in np.unique(blk):
            out.append((self._blocks[int(b)], row[blk == b], 0.0))
        return out

    def close(self) -> None:
        self._closed.set()
        self._state = LinkState.ENDED
