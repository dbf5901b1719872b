"""Benchmark of the alarm engine: 50 limits over 1,000,000 samples, and ZeroMQ-reading-to-alarm-event latency.

Run: python tests/bench/bench_alarms.py [--quick]
Prints figures and ratios measured side by side in this one run (no timed assertions anywhere).
"""

from __future__ import annotations

import argparse
import json
import multiprocessing
import statistics
import sys
import threading
import time
from typing import Any

import numpy as np

from monitor.alarms.engine import AlarmEngine
from monitor.alarms.envelope import parse_alarm_options, parse_limits
from monitor.model import Frame

RATE = 10_000.0
QUANTITIES = ("ne", "Te", "Ti", "B", "p0", "debye_length", "debye_number", "electron_plasma_frequency",
              "electron_ion_collision_frequency", "cutoff_ratio")


def _data(n: int, seed: int = 1) -> tuple[np.ndarray, dict[str, np.ndarray], dict[str, np.ndarray], np.ndarray]:
    rng = np.random.default_rng(seed)
    t = np.arange(n) / RATE
    values: dict[str, np.ndarray] = {}
    for i, q in enumerate(QUANTITIES):
        walk = np.cumsum(rng.normal(0, 0.002, n))
        values[q] = (1.0 + 0.3 * np.tanh(walk)) * (1e17 if q == "ne" else 10.0 ** (i - 3))
    ne = values["ne"]
    ne[(t > 30.0) & (t < 32.0)] = 1e13                     # two discharge-off stretches
    ne[(t > 70.0) & (t < 70.5)] = 1e13
    sigma = {q: 0.01 * np.abs(values[q]) for q in QUANTITIES[:4]}
    valid = rng.random(n) > 0.001
    return t, values, sigma, valid


def _limits(values: dict[str, np.ndarray]) -> list[dict[str, Any]]:
    """50 limits, 5 per quantity, at percentiles of the data so that some of them do trip."""
    out: list[dict[str, Any]] = []
    for q in QUANTITIES:
        v = values[q]
        p = np.percentile(v, [1, 5, 95, 99, 99.9])
        out += [
            {"name": f"{q}-hh", "quantity": q, "high": float(p[4]), "deadband": 0.02, "on_delay": 0.05},
            {"name": f"{q}-h", "quantity": q, "high": float(p[3]), "deadband": 0.01, "off_delay": 0.02,
             **({"uncertainty": "certain", "k": 2} if q in ("ne", "Te", "Ti", "B") else {})},
            {"name": f"{q}-band", "quantity": q, "low": float(p[1]), "high": float(p[2]), "deadband": 0.01},
            {"name": f"{q}-l", "quantity": q, "low": float(p[0]), "latch": True, "realarm_after": 30.0},
            {"name": f"{q}-far", "quantity": q, "high": float(p[4]) * 10.0,
             **({"predict_within": 10.0} if q in ("Te", "debye_length") else {})},
        ]
    return out


def _frames(t: np.ndarray, values: dict[str, np.ndarray], sigma: dict[str, np.ndarray], valid: np.ndarray,
            chunk: int) -> list[Frame]:
    return [Frame("probe", t[a:a + chunk], {k: v[a:a + chunk] for k, v in values.items()},
                  {k: s[a:a + chunk] for k, s in sigma.items()}, valid[a:a + chunk])
            for a in range(0, len(t), chunk)]


def _python_loop(t: np.ndarray, v: np.ndarray, high: float, on_delay: float) -> int:
    """A per-sample Python loop for one plain high limit with an on-delay (the thing not to do)."""
    active, since, toggles = False, None, 0
    band = 0.02 * high
    for ti, vi in zip(t.tolist(), v.tolist()):
        if not active:
            if vi > high:
                since = ti if since is None else since
                if ti - since >= on_delay:
                    active, since, toggles = True, None, toggles + 1
            else:
                since = None
        elif vi < high - band:
            active, toggles = False, toggles + 1
    return toggles


def bench_evaluation(n: int, repeat: int = 3) -> None:
    t, values, sigma, valid = _data(n)
    specs = parse_limits(_limits(values), "bench")
    opts = parse_alarm_options({}, "bench")
    print(f"== evaluation: {len(specs)} limits over {n:,} samples ({n / RATE:g} s of data at 10 kHz), "
          f"best of {repeat} ==")
    results = {}
    for chunk in (n, 10_000, 1_000):
        frames = _frames(t, values, sigma, valid, chunk)
        dt = float("inf")
        for _ in range(repeat):     # best of a few: the machine is shared
            eng = AlarmEngine(specs, opts, on_above=1e15, stale_after=2.0)
            start = time.perf_counter()
            events = 0
            for f in frames:
                events += len(eng.process(f))
            dt = min(dt, time.perf_counter() - start)
        results[chunk] = dt
        print(f"  frames of {chunk:>9,} samples: {dt:7.3f} s  {n / dt:12,.0f} samples/s  "
              f"{dt / n / len(specs) * 1e9:6.2f} ns per sample per limit  ({events} events)")
    # side by side: the least vectorised work (one comparison per limit) and a per-sample Python loop
    bare = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        for spec in specs:
            v = values[spec.quantity]
            _ = (v > spec.high).any() if spec.high is not None else (v < spec.low).any()
        bare = min(bare, time.perf_counter() - start)
    m = min(n, 100_000)
    q = specs[0]
    start = time.perf_counter()
    _python_loop(t[:m], values[q.quantity][:m], q.high or 0.0, q.on_delay)
    loop = (time.perf_counter() - start) * (n / m) * len(specs)
    best = min(results.values())
    print(f"  one bare numpy comparison per limit: {bare:.3f} s -> the engine costs {best / bare:.1f}x that")
    print(f"  per-sample Python loop, 1 limit on {m:,} samples, scaled to {len(specs)} limits x {n:,}: "
          f"{loop:.1f} s -> the engine is {loop / best:.0f}x faster")


def _publisher(box: Any, ready: Any, stop: Any, period: float, per_message: int, excursion_every: float) -> None:
    """Binary batches of ``per_message`` readings every ``period`` s; the last reading's t is its send time.

    Runs in its own process (as another program would), so it never competes with the session for
    the interpreter lock. Te crosses high = 5 eV on the last reading of a batch every
    ``excursion_every`` s and back ``excursion_every / 4`` later, so each raise and each return is
    dated at a publish time."""
    import zmq

    ctx = zmq.Context()
    pub = ctx.socket(zmq.PUB)
    pub.setsockopt(zmq.SNDHWM, 100_000)
    pub.bind("tcp://127.0.0.1:*")
    box.put(pub.getsockopt_string(zmq.LAST_ENDPOINT))
    ready.set()
    seq = 0
    dt = period / per_message
    header_fields = ["t", "ne", "Te"]
    next_send = time.perf_counter() + 0.5          # let the subscriber join
    start_wall = None
    while not stop.is_set():
        now = time.perf_counter()
        if now < next_send:
            time.sleep(min(next_send - now, 0.0005))
            continue
        next_send += period
        wall = time.time()
        start_wall = wall if start_wall is None else start_wall
        phase = (wall - start_wall) % excursion_every
        hot = phase < excursion_every / 4
        t = wall - dt * np.arange(per_message - 1, -1, -1)
        te = np.full(per_message, 7.0 if hot else 3.0)
        if phase < period or excursion_every / 4 <= phase < excursion_every / 4 + period:
            te[:-1] = 10.0 - te[-1]     # the first batch of each stretch: earlier readings on the old side
        cols = np.concatenate((t, np.full(per_message, 1e17), te)).astype("<f8")
        header = json.dumps({"fields": header_fields, "n": per_message, "seq": seq, "dtype": "<f8"}).encode()
        pub.send_multipart([header, cols.tobytes()])
        seq += per_message
    pub.close(linger=0)
    ctx.term()


class _LatencySink:
    def __init__(self) -> None:
        self.latencies: list[float] = []
        self.lock = threading.Lock()

    def on_frame(self, frame: Any) -> None:
        pass

    def on_rejections(self, rejections: Any) -> None:
        pass

    def on_status(self, status: Any) -> None:
        pass

    def on_alarm(self, event: Any) -> None:
        if event.alarm == "te-high" and event.action is None and event.state.value in (
                "unacknowledged", "returned_unacknowledged", "acknowledged", "normal") and event.time > 0:
            with self.lock:
                self.latencies.append(time.time() - event.time)

    def close(self) -> None:
        pass


def _pct(xs: list[float], p: float) -> float:
    s = sorted(xs)
    return s[min(len(s) - 1, int(round(p / 100 * (len(s) - 1))))]


def bench_latency(seconds: float) -> None:
    print(f"== end-to-end latency at 10 kHz over {seconds:g} s: reading published on ZeroMQ -> alarm event ==")
    try:
        from adapters.zmq_stream import ZmqSource
        from monitor.config import parse_config
        from monitor.session import Session
    except ImportError as exc:
        print(f"  skipped: {exc} (needs the pipeline's Session and the ZeroMQ source)")
        return
    import zmq

    period, per_message = 0.001, 10                   # 10 readings per message, 1000 messages/s
    for label, with_session in (("plain SUB socket (transport alone)", False),
                                ("ZmqSource -> Session (pipeline + engine)", True)):
        mp = multiprocessing.get_context("spawn")
        box, ready, stop = mp.Queue(), mp.Event(), mp.Event()
        proc = mp.Process(target=_publisher, args=(box, ready, stop, period, per_message, 0.04), daemon=True)
        proc.start()
        endpoint = box.get(timeout=30.0)
        ready.wait(5.0)
        lat: list[float] = []
        if with_session:
            config = parse_config({"discharge": {"on_above": 1e15},
                                   "limit": [{"name": "te-high", "quantity": "Te", "high": 5.0}]}, None)
            sink = _LatencySink()
            source = ZmqSource(endpoint, name="bench")
            engine = AlarmEngine.from_config(config)
            spent: list[float] = []
            inner = engine.process

            def timed(frame: Any, stats: Any = None) -> Any:
                t0 = time.perf_counter()
                try:
                    return inner(frame, stats)
                finally:
                    spent.append(time.perf_counter() - t0)

            engine.process = timed  # type: ignore[method-assign]
            session = Session(source, config, [sink], engine=engine, live=True)
            session.run(duration=seconds, timeout=0.01)
            if spent:
                us = [x * 1e6 for x in spent]
                print(f"  (engine.process alone: {len(us)} frames, median {statistics.median(us):.0f} us, "
                      f"p99 {_pct(us, 99):.0f} us, max {max(us):.0f} us)")
            session_close = getattr(session, "close", None)
            if callable(session_close):
                session_close()
            else:
                source.close()
            lat = sink.latencies
        else:
            sub = zmq.Context.instance().socket(zmq.SUB)
            sub.setsockopt(zmq.SUBSCRIBE, b"")
            sub.connect(endpoint)
            end = time.monotonic() + seconds
            while time.monotonic() < end:
                if sub.poll(10):
                    header, payload = sub.recv_multipart()
                    now = time.time()
                    cols = np.frombuffer(payload, dtype="<f8").reshape(3, -1)
                    lat.append(now - float(cols[0, -1]))
            sub.close(linger=0)
        stop.set()
        proc.join(5.0)
        if not lat:
            print(f"  {label}: no events received")
            continue
        ms = [x * 1e3 for x in lat]
        steady = ms[len(ms) // 8:]           # after the first eighth: first imports and allocations are done
        print(f"  {label}: all n={len(ms)}  median {statistics.median(ms):.2f} ms  p99 {_pct(ms, 99):.2f} ms  "
              f"max {max(ms):.2f} ms")
        print(f"  {' ' * len(label)}  after warm-up n={len(steady)}  median {statistics.median(steady):.2f} ms  "
              f"p99 {_pct(steady, 99):.2f} ms  max {max(steady):.2f} ms")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="100,000 samples and 3 s of latency")
    ap.add_argument("--skip-latency", action="store_true")
    args = ap.parse_args(argv)
    bench_evaluation(100_000 if args.quick else 1_000_000)
    if not args.skip_latency:
        bench_latency(3.0 if args.quick else 8.0)
    return 0


if __name__ == "__main__":
    sys.exit(main())
