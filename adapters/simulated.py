"""The simulated discharge: a pure, deterministic generator of scenario batches and SimSource pacing it.

Levels, rates and timelines of the scenarios are in adapters.scenarios
(``steady``, ``excursion``, ``dropout``, ``demo``). ``generate`` is a pure
function of (scenario, seed, rate, sample range): the same arguments always
give the same numbers, and generating 0-1 s then 1-2 s gives exactly what
generating 0-2 s gives (the noise is indexed by sample number, not drawn
from a running stream).

Every sample also carries its standard uncertainty in ``Batch.sigma`` (same
keys, NaN where the channel has no value): ``|reading| * sigma_rel`` of the
scenario's instrument for that channel. The noise added is the instrument's
``random`` part only; ``sigma_rel`` also holds its ``calibration`` part (see
adapters.scenarios for the sizes and why the calibration part is stated but
not realised).
"""

from __future__ import annotations

import math
import threading
import time
from functools import lru_cache

import numpy as np

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus
from adapters.batch import Batch
from adapters.scenarios import B, CHANNEL_RATES, P0, SCENARIOS, TE_GARBAGE, Scenario

__all__ = ["SCENARIOS", "generate", "generate_samples", "SimSource", "scenario_length", "MAX_RATE", "MAX_CHUNK",
           "next_sample"]

MAX_RATE = 1e7          # samples per second: the ceiling of a simulated source (one core makes ~1e7/s at best)
MAX_CHUNK = 262_144     # samples in one batch, whatever the rate (bounds the memory of one poll)
_BLOCK = 8192
_CHANNEL_ID = {"ne": 1, "Te": 2, "p0": 3, "B": 4}


@lru_cache(maxsize=64)
def next_sample(k: int, end: int, *, rate: float, speed: float | None, wall0: float, chunk: int,
                closed: threading.Event, timeout: float) -> int | None:
    """Where a simulated stream's next batch ends (samples [k, result) are due now): as fast as possible
    ``chunk`` at a time with ``speed`` None, else paced to the wall clock since ``wall0`` (waiting at most
    ``timeout`` for the next sample), a catch-up bounded by MAX_CHUNK; None when ``closed`` was set."""
    if speed is None:
        return min(k + chunk, end)
    due = int((time.monotonic() - wall0) * speed * rate)
    if due <= k:
        wait = (k + 1) / (rate * speed) - (time.monotonic() - wall0)
        if closed.wait(max(0.0, min(timeout, wait))):
            return None
        due = int((time.monotonic() - wall0) * speed * rate)
    return min(due, end, k + min(max(chunk, int(rate)), MAX_CHUNK))


def _block(seed: int, channel: int, block: int) -> np.ndarray:
    z = np.random.default_rng([seed, channel, block]).standard_normal(_BLOCK)
    z.setflags(write=False)
    return z


def _normals(seed: int, channel: int, idx: np.ndarray) -> np.ndarray:
    """Standard normal deviates indexed by sample number (reproducible in any chunking)."""
    out = np.empty(len(idx))
    if len(idx) == 0:
        return out
    first, last = int(idx[0]) // _BLOCK, int(idx[-1]) // _BLOCK
    if first == last:
        out[:] = _block(seed, channel, first)[idx - first * _BLOCK]
        return out
    cuts = np.searchsorted(idx, np.arange(first, last + 2, dtype=np.int64) * _BLOCK)   # idx is ascending
    for b in range(first, last + 1):
        lo, hi = int(cuts[b - first]), int(cuts[b - first + 1])
        if hi > lo:
            out[lo:hi] = _block(seed, channel, b)[idx[lo:hi] - b * _BLOCK]
    return out


def _scenario(name: str) -> Scenario:
    try:
        return SCENARIOS[name]
    except KeyError:
        raise FatalSourceError(f"unknown scenario {name!r}; known: {', '.join(SCENARIOS)}") from None


def scenario_length(name: str, rate: float) -> int:
    """Number of samples in one pass of the scenario at ``rate``."""
    return int(round(_scenario(name).duration * rate))


def _levels(sc: Scenario, s: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Noise-free ne, Te and the probe mode code (0 ok, 1 silent, 2 garbage) at scenario times s."""
    ends = np.array([p.end for p in sc.phases])
    starts = np.concatenate([[0.0], ends[:-1]])
    i = np.minimum(np.searchsorted(ends, s, side="right"), len(ends) - 1)
    ne_to = np.array([p.ne for p in sc.phases])
    te_to = np.array([p.Te for p in sc.phases])
    ne_from = np.concatenate([[sc.start_ne], ne_to[:-1]])
    te_from = np.concatenate([[sc.start_Te], te_to[:-1]])
    ramp = np.array([p.ramp for p in sc.phases])
    f = np.where(ramp[i] > 0, np.clip((s - starts[i]) / np.where(ramp[i] > 0, ramp[i], 1.0), 0.0, 1.0), 1.0)
    f = f * f * (3.0 - 2.0 * f)                                       # smooth step
    ne = np.exp(np.log(ne_from[i]) + f * (np.log(ne_to[i]) - np.log(ne_from[i])))   # geometric ramp
    te = te_from[i] + f * (te_to[i] - te_from[i])
    probe = np.array([{"ok": 0, "silent": 1, "garbage": 2}[p.probe] for p in sc.phases])[i]
    return ne, te, probe


def generate_samples(scenario: str, seed: int, rate: float, k0: int, k1: int, *,
                     loop: bool = False, source: str | None = None) -> Batch:
    """Samples k0 .. k1-1 (sample k at scenario time k/rate); with ``loop`` the scenario repeats.

    Columns ne (m^-3), Te (eV), p0 (Pa), B (T); NaN where a channel has no new
    value at that sample. ``sigma`` has the same keys: the standard
    uncertainty of each reading, ``|reading| * sigma_rel`` of the channel's
    instrument (NaN where the column is NaN). ``seq`` is the sample number k.
    ``t`` is k/rate (time keeps increasing across loops).
    """
    sc = _scenario(scenario)
    if not rate > 0 or not math.isfinite(rate):
        raise FatalSourceError(f"rate must be a positive number of samples per second, got {rate}")
    n_pass = int(round(sc.duration * rate))
    if not loop:
        k1 = min(k1, n_pass)
    k0 = max(0, k0)
    k = np.arange(k0, max(k0, k1), dtype=np.int64)
    t = k / rate
    s = (k % n_pass) / rate if loop else t
    ne_lv, te_lv, probe = _levels(sc, s)
    inst = sc.instruments
    cols: dict[str, np.ndarray] = {"ne": ne_lv * (1.0 + inst.ne.random * _normals(seed, _CHANNEL_ID["ne"], k))}
    for ch, level in (("Te", None), ("p0", P0), ("B", B)):
        r = min(CHANNEL_RATES[ch], rate)
        # slow sample j starts at the first k with k * r / rate >= j, i.e. k = ceil(j * rate / r)
        j_lo = max(0, int(math.floor(k0 * r / rate)) - 1)
        j = np.arange(j_lo, j_lo + int(len(k) * r / rate) + 4, dtype=np.int64)
        ks = np.ceil(j * (rate / r) - 1e-9).astype(np.int64)
        keep = (ks >= k0) & (ks < k0 + len(k))
        j, idx = j[keep], ks[keep] - k0
        col = np.full(len(k), np.nan)
        base = te_lv[idx] if level is None else np.full(len(idx), level)
        col[idx] = base * (1.0 + inst.of(ch).random * _normals(seed, _CHANNEL_ID[ch], j))
        if ch == "Te":
            garbage = probe[idx] == 2
            col[idx[garbage]] = np.asarray(TE_GARBAGE)[j[garbage] % len(TE_GARBAGE)]
            col[idx[probe[idx] == 1]] = np.nan
        cols[ch] = col
    sigma = {ch: np.abs(col) * inst.of(ch).sigma_rel for ch, col in cols.items()}      # NaN stays NaN
    return Batch(source=source or f"sim:{scenario}", t=t, columns=cols, sigma=sigma, seq=k, t_from_source=True)


def generate(scenario: str, seed: int = 0, rate: float = 1000.0, t0: float = 0.0,
             t1: float | None = None, *, loop: bool = False) -> Batch:
    """The samples with scenario time in [t0, t1) (t1 None: the scenario's end); see generate_samples."""
    sc = _scenario(scenario)
    end = sc.duration if t1 is None else t1
    k0 = int(math.ceil(t0 * rate - 1e-9))
    k1 = int(math.ceil(end * rate - 1e-9))
    return generate_samples(scenario, seed, rate, k0, k1, loop=loop)


class SimSource:
    """A Source replaying a scenario, paced by the wall clock (``speed`` x real time) or as fast as possible.

    ``duration`` (s of scenario time) stops it early or, with ``loop``, bounds
    the repetitions; without either it ends at the scenario's end (status
    ended). Batch times are ``epoch + k/rate``; ``epoch`` defaults to the wall
    time at ``open()`` so that the data clock reads like a live one.
    """

    def __init__(self, scenario: str, *, seed: int = 0, rate: float = 1000.0, speed: float | None = 1.0,
                 duration: float | None = None, loop: bool = False, name: str | None = None,
                 epoch: float | None = None, chunk: int | None = None) -> None:
        sc = _scenario(scenario)
        if not rate > 0 or not math.isfinite(rate):
            raise FatalSourceError(f"sim: rate must be positive, got {rate}")
        if rate > MAX_RATE:
            raise FatalSourceError(f"sim: rate {rate:g} Hz is over the simulator's ceiling of {MAX_RATE:g} Hz")
        if speed is not None and not (speed > 0 and math.isfinite(speed)):
            raise FatalSourceError(f"sim: speed must be positive or max, got {speed}")
        self.name = name or f"sim:{scenario}"
        self.scenario, self.seed, self.rate, self.speed, self.loop = scenario, seed, rate, speed, loop
        length = duration if loop else (sc.duration if duration is None else min(duration, sc.duration))
        self._total: int | None = None if length is None else int(round(length * rate))
        self._epoch_arg = epoch
        self._epoch = 0.0
        self._chunk = min(chunk or max(1000, int(rate * 0.05)), MAX_CHUNK)
        self._k = 0
        self._wall0 = 0.0
        self._closed = threading.Event()
        self._state = LinkState.CONNECTING

    def open(self) -> None:
        self._wall0 = time.monotonic()
        self._epoch = time.time() if self._epoch_arg is None else self._epoch_arg
        self._state = LinkState.CONNECTED

    def status(self) -> SourceStatus:
        msg = f"{self.scenario} at {self.rate:g} Hz, sample {self._k}"
        return SourceStatus(self.name, self._state, msg)

    def poll(self, timeout: float) -> Polled:
        if self._state is LinkState.CONNECTING:
            self.open()
        if self._state is not LinkState.CONNECTED:
            return Polled(status=self.status())
        end = self._total if self._total is not None else 2**62
        k1 = next_sample(self._k, end, rate=self.rate, speed=self.speed, wall0=self._wall0, chunk=self._chunk,
                         closed=self._closed, timeout=timeout)
        if k1 is None:
            return Polled(status=self.status())
        batches: list[Batch] = []
        if k1 > self._k:
            b = generate_samples(self.scenario, self.seed, self.rate, self._k, k1, loop=self.loop, source=self.name)
            if self._epoch:
                b = Batch(source=b.source, t=b.t + self._epoch, columns=b.columns, sigma=b.sigma, seq=b.seq,
                          t_from_source=True)
            batches.append(b)
            self._k = k1
        if self._k >= end:
            self._state = LinkState.ENDED
        return Polled(batches=batches, status=self.status())

    def close(self) -> None:
        self._closed.set()
        if self._state is not LinkState.ENDED:
            self._state = LinkState.ENDED
