"""A simulated quadrature interferometer (our own scenario): I/Q with noise, a density ramp, a fast step that loses a fringe.

The invented set-up: a 100 GHz (3 mm) microwave interferometer on a 0.2 m
chord, double pass. Timeline of the line-averaged density (s from start):
off 0-0.5; smooth ramp 0.5-1.5 to 3.0e18 m^-3; steady to 2.5; at 2.5 a
step up by 1.2e18 m^-3 within one sample (a phase step of about 1.3 pi, so
continuity unwrapping loses one fringe) with the I/Q amplitude refracted
down to 0.15 for 3 ms; hold at 4.2e18; smooth ramp down 3.5-4.0; off 4.0-5.0.
The bench phase drifts by 0.05 rad/s throughout (what the discharge-off
re-zero takes out). I and Q carry independent Gaussian noise of 0.01 on an
amplitude of 1 (a phase noise of about 0.01 rad). The ``discharge`` column
is 1 while the discharge is on (0.5-4.0 s), 0 otherwise. A Langmuir probe
beside it gives ``Te`` at 20 Hz (NaN in the other rows): 0.5 eV off, rising
with the density to 3.0 eV, 3 % noise, so the criteria have a temperature.

``generate_samples`` is a pure function of (seed, rate, sample range): the
noise is indexed by sample number, so any cutting of the stream gives the
same numbers. The phase is the exact cold-plasma phase of a uniform chord,
phi = (omega/c) P L (1 - sqrt(1 - n/n_c)); this module may not import the
monitor's physics (adapters never import monitor), so it keeps its own
copy of four CODATA constants, checked against the monitor's in the tests.
"""

from __future__ import annotations

import math
import threading
import time
from dataclasses import dataclass

import numpy as np

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus
from adapters.batch import Batch
from adapters.simulated import next_sample

__all__ = ["InterferometerScenario", "SCENARIO", "density_at", "phase_of_density", "generate_samples", "generate",
           "InterferometerSimSource"]

# CODATA 2022 (the monitor's monitor.physics.constants; equal, checked in the tests)
_E = 1.602176634e-19
_ME = 9.1093837139e-31
_EPS0 = 8.8541878188e-12
_C = 299792458.0
_BLOCK = 8192


@dataclass(frozen=True)
class InterferometerScenario:
    """The invented interferometer and its discharge timeline (SI units)."""

    frequency: float = 100e9        # Hz
    path_length: float = 0.2        # m, the chord
    passes: int = 2
    duration: float = 5.0           # s
    on: tuple[float, float] = (0.5, 4.0)
    ramp_up: tuple[float, float] = (0.5, 1.5)
    steady: float = 3.0e18          # m^-3
    step_at: float = 2.5
    step: float = 1.2e18            # m^-3, within one sample
    refraction: float = 0.003       # s of amplitude dip after the step
    dip_amplitude: float = 0.15
    ramp_down: tuple[float, float] = (3.5, 4.0)
    drift: float = 0.05             # rad/s of bench phase drift
    iq_noise: float = 0.01          # standard deviation of I and Q each (amplitude 1)
    offset: float = 0.4             # rad, the bench phase at t = 0
    te_rate: float = 20.0           # Hz
    te_off: float = 0.5             # eV
    te_on: float = 3.0              # eV at the steady density and above
    te_noise: float = 0.03          # relative


SCENARIO = InterferometerScenario()


def _smooth(x: np.ndarray) -> np.ndarray:
    x = np.clip(x, 0.0, 1.0)
    out: np.ndarray = x * x * (3.0 - 2.0 * x)
    return out


def density_at(s: np.ndarray, sc: InterferometerScenario = SCENARIO) -> np.ndarray:
    """Noise-free line-averaged density (m^-3) at scenario times ``s`` (s)."""
    s = np.asarray(s, dtype=np.float64)
    up = _smooth((s - sc.ramp_up[0]) / (sc.ramp_up[1] - sc.ramp_up[0]))
    down = 1.0 - _smooth((s - sc.ramp_down[0]) / (sc.ramp_down[1] - sc.ramp_down[0]))
    level = sc.steady + np.where(s >= sc.step_at, sc.step, 0.0)
    out: np.ndarray = level * up * down
    return out


def phase_of_density(n: np.ndarray, sc: InterferometerScenario = SCENARIO) -> np.ndarray:
    """Exact cold-plasma phase shift (rad) of a uniform chord at density ``n`` (m^-3)."""
    w = 2.0 * math.pi * sc.frequency
    nc = _EPS0 * _ME * w * w / (_E * _E)
    return (w / _C) * sc.passes * sc.path_length * (1.0 - np.sqrt(1.0 - np.asarray(n, dtype=np.float64) / nc))


def _normals(seed: int, channel: int, k: np.ndarray) -> np.ndarray:
    """Standard normal deviates indexed by sample number (the same in any chunking)."""
    out = np.empty(len(k))
    if len(k) == 0:
        return out
    blocks = k // _BLOCK
    for b in range(int(blocks[0]), int(blocks[-1]) + 1):
        sel = blocks == b
        z = np.random.default_rng([seed, channel, b]).standard_normal(_BLOCK)
        out[sel] = z[k[sel] - b * _BLOCK]
    return out


def generate_samples(seed: int, rate: float, k0: int, k1: int, *, loop: bool = False,
                     sc: InterferometerScenario = SCENARIO, source: str = "sim:interferometer") -> Batch:
    """Samples k0 .. k1-1 (sample k at time k/rate): columns ``I_q``, ``Q_q``, ``discharge``, ``Te``; seq = k."""
    if not (rate > 0 and math.isfinite(rate)):
        raise FatalSourceError(f"rate must be a positive number of samples per second, got {rate}")
    n_pass = int(round(sc.duration * rate))
    if not loop:
        k1 = min(k1, n_pass)
    k = np.arange(max(0, k0), max(k0, k1), dtype=np.int64)
    t = k / rate
    s = (k % n_pass) / rate
    phase = phase_of_density(density_at(s, sc), sc) + sc.offset + sc.drift * t
    amp = np.where((s >= sc.step_at) & (s < sc.step_at + sc.refraction), sc.dip_amplitude, 1.0)
    i = amp * np.cos(phase) + sc.iq_noise * _normals(seed, 11, k)
    q = amp * np.sin(phase) + sc.iq_noise * _normals(seed, 12, k)
    on = ((s >= sc.on[0]) & (s < sc.on[1])).astype(np.float64)
    slot = np.floor(k * (sc.te_rate / rate))
    new_slot = slot != np.floor((k - 1) * (sc.te_rate / rate))        # the first sample of each 20 Hz slot
    te_level = sc.te_off + (sc.te_on - sc.te_off) * np.clip(density_at(s, sc) / sc.steady, 0.0, 1.0)
    te = np.where(new_slot, te_level * (1.0 + sc.te_noise * _normals(seed, 13, k)), np.nan)
    return Batch(source=source, t=t, columns={"I_q": i, "Q_q": q, "discharge": on, "Te": te}, seq=k)


def generate(seed: int = 0, rate: float = 1000.0, t0: float = 0.0, t1: float | None = None,
             sc: InterferometerScenario = SCENARIO) -> Batch:
    """The samples with time in [t0, t1) (t1 None: the scenario's end)."""
    end = sc.duration if t1 is None else t1
    return generate_samples(seed, rate, int(math.ceil(t0 * rate - 1e-9)), int(math.ceil(end * rate - 1e-9)), sc=sc)


class InterferometerSimSource:
    """A Source playing the scenario, paced by the wall clock (``speed`` x real time) or as fast as possible.

    Takes the same parameters as the other simulated scenarios (``seed``,
    ``rate``, ``speed``, ``duration``, ``loop``); data time is ``epoch +
    k/rate``, the epoch the wall time at ``open()`` unless given.
    """

    def __init__(self, scenario: str = "interferometer", *, seed: int = 0, rate: float = 1000.0,
                 speed: float | None = 1.0, duration: float | None = None, loop: bool = False,
                 name: str | None = None, epoch: float | None = None, chunk: int | None = None) -> None:
        if scenario != "interferometer":
            raise FatalSourceError(f"unknown interferometer scenario {scenario!r}; known: interferometer")
        if not (rate > 0 and math.isfinite(rate)):
            raise FatalSourceError(f"sim: rate must be positive, got {rate}")
        if speed is not None and not (speed > 0 and math.isfinite(speed)):
            raise FatalSourceError(f"sim: speed must be positive or max, got {speed}")
        self.name = name or "sim:interferometer"
        self.seed, self.rate, self.speed, self.loop = seed, rate, speed, loop
        length = duration if loop else (SCENARIO.duration if duration is None else min(duration, SCENARIO.duration))
        self._total: int | None = None if length is None else int(round(length * rate))
        self._epoch_arg = epoch
        self._epoch = 0.0
        self._chunk = chunk or max(1000, int(rate * 0.05))
        self._k = 0
        self._wall0 = 0.0
        self._closed = threading.Event()
        self._state = LinkState.CONNECTING

    def open(self) -> None:
        self._wall0 = time.monotonic()
        self._epoch = time.time() if self._epoch_arg is None else self._epoch_arg
        self._state = LinkState.CONNECTED

    def status(self) -> SourceStatus:
        return SourceStatus(self.name, self._state, f"interferometer at {self.rate:g} Hz, sample {self._k}")

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
            b = generate_samples(self.seed, self.rate, self._k, k1, loop=self.loop, source=self.name)
            batches.append(Batch(source=b.source, t=b.t + self._epoch, columns=b.columns, seq=b.seq))
            self._k = k1
        if self._k >= end:
            self._state = LinkState.ENDED
        return Polled(batches=batches, status=self.status())

    def close(self) -> None:
        self._closed.set()
        self._state = LinkState.ENDED
