"""The alarm engine: evaluates the envelope over each frame's arrays in data time and runs every alarm's states."""

from __future__ import annotations

import threading
import time as _time
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any, Callable, Iterable, Mapping

import numpy as np

from monitor.alarms.detect import RunState, toggles
from monitor.alarms.discharge import DischargeDetector
from monitor.alarms.envelope import AlarmOptions, LimitSpec
from monitor.alarms.events import AlarmEvent, AlarmState, AlarmView, Priority
from monitor.alarms.load import LoadTracker
from monitor.alarms.predictive import SlopePredictor
from monitor.alarms.quality import QualityWindow
from monitor.alarms.states import AlarmCore, finite_or_none
from monitor.errors import UsageError
from monitor.model import Frame, Stats
from monitor.operator import UnknownAlarm

if TYPE_CHECKING:
    from monitor.config import Config

__all__ = ["AlarmEngine"]


@dataclass(eq=False)
class _Limit:
    spec: LimitSpec
    core: AlarmCore
    det: RunState = field(default_factory=RunState)
    predictor: SlopePredictor | None = None
    pcore: AlarmCore | None = None


@dataclass(eq=False)
class _Source:
    stale: AlarmCore
    quality: AlarmCore
    window: QualityWindow
    det: RunState = field(default_factory=RunState)
    last_t: float | None = None
    first_seen: float | None = None


_BLOCK = 32768     # samples evaluated at a time


def _slice(frame: Frame, a: int, b: int) -> Frame:
    return Frame(source=frame.source, t=frame.t[a:b], values={k: v[a:b] for k, v in frame.values.items()},
                 sigma={k: v[a:b] for k, v in frame.sigma.items()},
                 valid=None if frame.valid is None else frame.valid[a:b],
                 discharge=None if frame.discharge is None else frame.discharge[a:b])


def _first(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


class AlarmEngine:
    """Turns frames into alarm events. Deterministic in data time: the same samples give the same
    events whatever the chunking; the clock is read only for the events' ``wall`` field."""

    def __init__(self, limits: Iterable[LimitSpec], options: AlarmOptions | None = None, *,
                 on_above: float | None = 1e15, stale_after: float = 2.0,
                 clock: Callable[[], float] = _time.time) -> None:
        self.options = options or AlarmOptions()
        self.on_above = on_above
        self.stale_after = stale_after
        self.clock = clock
        self._lock = threading.RLock()
        self._on: bool | None = None
        # judges frames built without a pipeline (by hand); the pipeline's frames carry its answer
        self._detector = DischargeDetector(on_above, self.options.discharge_deadband, self.options.discharge_delay)
        self._order: dict[str, int] = {}
        self._cores: dict[str, AlarmCore] = {}
        self._limits: list[_Limit] = []
        self._sources: dict[str, _Source] = {}
        o = self.options
        self._load = LoadTracker(o.flood_window, o.flood_count, o.flood_clear, o.chatter_window, o.chatter_count)
        for spec in limits:
            core = self._add(AlarmCore(spec.name, "limit", spec.quantity, spec.priority, clock, spec.description,
                                       spec.latch, spec.realarm_after, spec.max_shelve or o.max_shelve,
                                       suppressed=spec.only_when_on, out_of_service=spec.out_of_service))
            core.limit = spec.high if spec.high is not None else spec.low
            lim = _Limit(spec, core)
            if spec.predict_within is not None:
                lim.predictor = SlopePredictor(spec.high, spec.low, spec.predict_within,
                                               spec.predict_window or o.predict_window, o.predict_step)
                lim.pcore = self._add(AlarmCore(f"{spec.name}:predict", "predictive", spec.quantity,
                                                spec.predict_priority or o.predict_priority, clock,
                                                f"{spec.name} expected within {spec.predict_within:g} s",
                                                max_shelve=spec.max_shelve or o.max_shelve,
                                                suppressed=spec.only_when_on, out_of_service=spec.out_of_service))
            if lim.pcore is not None:
                lim.pcore.limit = core.limit
            self._limits.append(lim)

    @classmethod
    def from_config(cls, config: Config, *, clock: Callable[[], float] = _time.time) -> "AlarmEngine":
        """From monitor.config.Config: its limits, alarm options, on_above and stale_after."""
        return cls(config.limits, config.alarms, on_above=config.on_above, stale_after=config.stale_after,
                   clock=clock)

    def _add(self, core: AlarmCore) -> AlarmCore:
        if core.alarm in self._cores:
            raise UsageError(f"duplicate alarm id {core.alarm!r}")
        self._order[core.alarm] = len(self._order)
        self._cores[core.alarm] = core
        return core

    def _source(self, name: str, seen: float) -> _Source:
        src = self._sources.get(name)
        if src is None:
            o = self.options
            stale = self._add(AlarmCore(f"{name}:stale", "stale", None, o.stale_priority, self.clock,
                                        f"no data from {name} for {self.stale_after:g} s", max_shelve=o.max_shelve))
            quality = self._add(AlarmCore(f"{name}:quality", "quality", None, o.quality_priority, self.clock,
                                          f"more than {o.quality_above:.0%} of samples from {name} invalid "
                                          f"over {o.quality_window:g} s", max_shelve=o.max_shelve))
            stale.limit, quality.limit = self.stale_after, o.quality_above
            src = _Source(stale, quality, QualityWindow(o.quality_window, o.quality_above, o.quality_below,
                                                        o.quality_min_samples), first_seen=seen)
            self._sources[name] = src
        return src

    # -- evaluation -----------------------------------------------------------------------

    @property
    def discharge_on(self) -> bool:
        return bool(self._on)

    def _discharge(self, frame: Frame, t: np.ndarray) -> np.ndarray:
        """Per-sample discharge-on flags: the pipeline's answer carried by the frame (the one rule,
        monitor.alarms.discharge); a frame built by hand is judged by the same rule here."""
        if frame.discharge is not None:
            return np.asarray(frame.discharge, dtype=bool)
        return self._detector.step(t, frame.values.get("ne"))

    def process(self, frame: Frame) -> list[AlarmEvent]:
        """Evaluate one frame; returns its events in data-time order. The predictive warning fits
        its own slope on a fixed grid, so that nothing depends on where frames begin and end."""
        n = len(frame)
        if n == 0:
            return []
        if n > _BLOCK:     # the result does not depend on the chunking; blocks stay in the CPU cache
            events: list[AlarmEvent] = []
            for a in range(0, n, _BLOCK):
                events += self.process(_slice(frame, a, a + _BLOCK))
            return events
        with self._lock, np.errstate(all="ignore"):
            t = np.asarray(frame.t, dtype=np.float64)
            out: list[tuple[float, int, int, AlarmEvent]] = []
            seq = [0]

            def keep(events: list[AlarmEvent]) -> None:
                for e in events:
                    out.append((e.time, self._order[e.alarm], seq[0], e))
                    seq[0] += 1

            src = self._source(frame.source, float(t[0]))
            keep(self._stale(src, t))
            valid = np.ones(n, dtype=bool) if frame.valid is None else np.asarray(frame.valid, dtype=bool)
            keep(self._quality(src, t, valid))
            on = self._discharge(frame, t)
            segments = self._segments(on, n)
            cache: dict[Any, Any] = {}
            for lim in self._limits:
                keep(self._evaluate(lim, frame, t, valid, segments, cache))
            for core in self._cores.values():
                keep(core.fire_due(float(t[-1]), strict=False))
            if on is not None:
                self._on = bool(on[-1])
            out.sort(key=lambda x: x[:3])
            events = [e for *_, e in out]
            self._load.record(events)
            self._load.advance(float(t[-1]))
            return events

    def _segments(self, on: np.ndarray | None, n: int) -> list[tuple[int, int, bool]]:
        if on is None:
            return [(0, n, bool(self._on))]
        cuts = (np.flatnonzero(on[1:] != on[:-1]) + 1).tolist()
        bounds = [0, *cuts, n]
        return [(a, b, bool(on[a])) for a, b in zip(bounds[:-1], bounds[1:])]

    def _stale(self, src: _Source, t: np.ndarray) -> list[AlarmEvent]:
        sa = self.stale_after
        events: list[AlarmEvent] = []
        prev = src.last_t
        if prev is None and src.stale.active:
            events += src.stale.set_active(False, float(t[0]), None, sa)
        gaps = np.flatnonzero(np.diff(t) > sa)
        pairs = [(float(t[i]), float(t[i + 1])) for i in gaps]
        if prev is not None and float(t[0]) - prev > sa:
            pairs.insert(0, (prev, float(t[0])))
        elif prev is not None and src.stale.active:
            events += src.stale.set_active(False, float(t[0]), float(t[0]) - prev, sa)
        for before, after in pairs:
            events += src.stale.fire_due(before + sa, strict=True)
            if not src.stale.active:
                events += src.stale.set_active(True, before + sa, None, sa)
            events += src.stale.fire_due(after, strict=True)
            events += src.stale.set_active(False, after, after - before, sa)
        src.last_t = float(t[-1]) if src.last_t is None else max(src.last_t, float(t[-1]))
        return events

    def _quality(self, src: _Source, t: np.ndarray, valid: np.ndarray) -> list[AlarmEvent]:
        raise_c, clear_fn, share = src.window.conditions(t, ~valid, src.det.active)
        events: list[AlarmEvent] = []
        for i, flag in toggles(t, raise_c, clear_fn, 0.0, 0.0, src.det):
            events += src.quality.fire_due(float(t[i]), strict=True)
            events += src.quality.set_active(flag, float(t[i]), float(share[i]),
                                             self.options.quality_above)
        return events

    @staticmethod
    def _samples(cache: dict[Any, Any], frame: Frame, t: np.ndarray, valid: np.ndarray, quantity: str,
                 a: int, b: int, with_sigma: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
        """The evaluable samples (valid, finite) of ``quantity`` in [a, b): shared by its limits."""
        key = (quantity, a, b, with_sigma)
        hit = cache.get(key)
        if hit is not None:
            return hit
        v = frame.values[quantity]
        if quantity not in cache:
            mask = valid & np.isfinite(v)
            cache[quantity] = None if mask.all() else mask
        ok = cache[quantity]
        sigma = frame.sigma.get(quantity) if with_sigma else None
        ts, vs = t[a:b], v[a:b]
        ss = sigma[a:b] if sigma is not None else None
        if ok is not None:
            sel = np.flatnonzero(ok[a:b])
            ts, vs = ts[sel], vs[sel]
            ss = ss[sel] if ss is not None else None
        cache[key] = (ts, vs, ss)
        if len(vs):
            cache[("range", quantity, a, b)] = (float(vs.max()), float(vs.min()))
        return ts, vs, ss

    def _evaluate(self, lim: _Limit, frame: Frame, t: np.ndarray, valid: np.ndarray,
                  segments: list[tuple[int, int, bool]], cache: dict[Any, Any]) -> list[AlarmEvent]:
        spec, core = lim.spec, lim.core
        v = frame.values.get(spec.quantity)
        events: list[AlarmEvent] = []
        cores = [c for c in (core, lim.pcore) if c is not None]
        for a, b, flag in segments:
            if spec.only_when_on and not flag:
                value = _first(v[a]) if v is not None else None
                for c in cores:
                    events += c.fire_due(float(t[a]), strict=True)
                    events += c.set_suppressed(True, float(t[a]), value)
                lim.det.reset()
                if lim.predictor is not None:
                    lim.predictor.reset()
                continue
            if spec.only_when_on and core.suppressed:
                value = _first(v[a]) if v is not None else None
                for c in cores:
                    events += c.fire_due(float(t[a]), strict=True)
                    events += c.set_suppressed(False, float(t[a]), value)
            if v is None:
                continue
            ts, vs, ss = self._samples(cache, frame, t, valid, spec.quantity, a, b, spec.uncertainty != "none")
            if len(ts):
                vmax, vmin = cache[("range", spec.quantity, a, b)]
                if (not lim.det.active and ss is None and (spec.high is None or not vmax > spec.high)
                        and (spec.low is None or not vmin < spec.low)):
                    lim.det.run_start = None        # nothing beyond the limit in this stretch
                else:
                    events += self._limit_toggles(lim, ts, vs, ss)
            if lim.predictor is not None and lim.pcore is not None:
                for p, up in lim.predictor.evaluate(ts, vs, float(t[a]), float(t[b - 1])):
                    events += lim.pcore.fire_due(p.time, strict=True)
                    if p.predicted_time is not None or not up:
                        lim.pcore.predicted_time = p.predicted_time
                    events += lim.pcore.set_active(up, p.time, p.value, p.limit)
        return events

    def _limit_toggles(self, lim: _Limit, ts: np.ndarray, vs: np.ndarray, ss: np.ndarray | None) -> list[AlarmEvent]:
        spec = lim.spec
        v_hi = v_lo = vs
        if ss is not None and spec.uncertainty != "none":
            ks = spec.k * np.where(np.isfinite(ss), np.abs(ss), 0.0)
            sign = -1.0 if spec.uncertainty == "certain" else 1.0
            v_hi, v_lo = vs + sign * ks, vs - sign * ks
        if spec.high is not None and spec.low is not None:
            raise_c = (v_hi > spec.high) | (v_lo < spec.low)
            bh, bl = spec.band(spec.high), spec.band(spec.low)
            clear_fn = lambda: (v_hi < spec.high - bh) & (v_lo > spec.low + bl)  # noqa: E731
        elif spec.high is not None:
            high = spec.high
            raise_c = v_hi > high
            bh = spec.band(high)
            clear_fn = lambda: v_hi < high - bh  # noqa: E731
        else:
            assert spec.low is not None             # a limit has a high or a low (envelope.py)
            low = spec.low
            raise_c = v_lo < low
            bl = spec.band(low)
            clear_fn = lambda: v_lo > low + bl  # noqa: E731
        events: list[AlarmEvent] = []
        core = lim.core
        for i, up in toggles(ts, raise_c, clear_fn, spec.on_delay, spec.off_delay, lim.det):
            ti = float(ts[i])
            events += core.fire_due(ti, strict=True)
            side = core.limit
            if up:
                side = spec.high if spec.high is not None and v_hi[i] > spec.high else spec.low
            events += core.set_active(up, ti, float(vs[i]), side)
        return events

    def set_condition(self, alarm: str, active: bool, at: float, message: str, *,
                      priority: Priority = Priority.HIGH, kind: str = "quality") -> list[AlarmEvent]:
        """A condition raised by a part of the tool (e.g. ``recorder:write``, the recorder's health):
        an alarm of this engine like any other, with acknowledgement, shelving and re-alarm timing
        from the same state machine. The first call makes it (normal until active); ``message``
        says why, and is the event's message."""
        with self._lock:
            core = self._cores.get(alarm)
            if core is None:
                if not active:
                    return []
                o = self.options
                core = self._add(AlarmCore(alarm, kind, None, priority, self.clock, message, max_shelve=o.max_shelve))
            if core.active == active:
                return []
            core.description = message
            events = [replace(e, message=e.message or message) for e in core.set_active(active, at, None, None)]
            self._load.record(events)
            return events

    def tick(self, now: float, source: str) -> list[AlarmEvent]:
        """Stale check for ``source`` at data time ``now``; the alarm is dated when the data stopped + stale_after."""
        with self._lock:
            src = self._source(source, now)
            ref = src.last_t if src.last_t is not None else src.first_seen
            events: list[AlarmEvent] = []
            if ref is not None and now - ref > self.stale_after and not src.stale.active:
                events = src.stale.set_active(True, ref + self.stale_after, None, self.stale_after)
            self._load.record(events)
            return events

    def on_seek(self, t: float) -> None:
        """A replay jumped to ``t`` (time may go back): timing carries, windows and the load figures
        start over; alarm states are kept (the next samples move them as usual)."""
        with self._lock:
            self._detector.restart()
            for lim in self._limits:
                lim.det.run_start = None
                if lim.predictor is not None:
                    lim.predictor.restart()
            for src in self._sources.values():
                src.last_t = None
                src.det.run_start = None
                src.window.clear()
            o = self.options
            self._load = LoadTracker(o.flood_window, o.flood_count, o.flood_clear, o.chatter_window,
                                     o.chatter_count)

    # -- operator actions -----------------------------------------------------------------

    def _core(self, alarm: str) -> AlarmCore:
        try:
            return self._cores[alarm]
        except KeyError:
            raise UnknownAlarm(f"unknown alarm {alarm!r}; known: {', '.join(self._cores)}") from None

    def acknowledge(self, alarm: str | None, at: float) -> list[AlarmEvent]:
        """Acknowledge one alarm, or every alarm waiting for it (None)."""
        with self._lock:
            cores = list(self._cores.values()) if alarm is None else [self._core(alarm)]
            return [e for c in cores for e in c.acknowledge(at)]

    def shelve(self, alarm: str, duration: float | None, at: float) -> list[AlarmEvent]:
        """Shelve for ``duration`` s (at most the maximum) or one-shot until it returns (None)."""
        with self._lock:
            return self._core(alarm).shelve(duration, at)

    def unshelve(self, alarm: str, at: float) -> list[AlarmEvent]:
        with self._lock:
            return self._core(alarm).unshelve(at)

    def reset(self, alarm: str, at: float) -> list[AlarmEvent]:
        """Reset a latched alarm; refused (an event saying why) until it has returned and been acknowledged."""
        with self._lock:
            return self._core(alarm).reset(at)

    def set_out_of_service(self, alarm: str, flag: bool, at: float) -> list[AlarmEvent]:
        with self._lock:
            return self._core(alarm).set_out_of_service(flag, at)

    # -- views ----------------------------------------------------------------------------

    def views(self) -> tuple[AlarmView, ...]:
        with self._lock:
            return tuple(AlarmView(alarm=c.alarm, state=c.state, priority=c.priority, kind=c.kind,
                                   quantity=c.quantity, value=c.value, limit=c.limit, since=c.since,
                                   description=c.description, predicted_time=c.predicted_time,
                                   latched=c.latched, shelved_until=c.shelved_until if c.shelved else None,
                                   trip_value=finite_or_none(c.trip_value), active=c.active,
                                   awaiting_reset=c.latched and not c.active)
                         for c in self._cores.values())

    def state(self, alarm: str) -> AlarmState:
        with self._lock:
            return self._core(alarm).state

    def load(self) -> tuple[int, bool, tuple[str, ...]]:
        """(alarms in the last flood window, 10 min by default; flood; chattering alarm ids)."""
        with self._lock:
            ld = self._load.load()
            return ld.alarms_per_window, ld.flood, ld.chattering
