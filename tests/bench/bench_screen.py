"""Benchmark of the screen: refreshes/s and CPU while a ZeroMQ publisher (own process) sends 100k readings/s; import-to-first-frame.

Run: python tests/bench/bench_screen.py [--seconds 8] [--rate 100000]
Prints, side by side in one run, the same ingestion without the screen and with the screen
at 160x50: accepted and lost (by seq), the pipeline thread's CPU, the screen thread's CPU
(its share of one core) and the refreshes per second achieved.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import multiprocessing as mp
import os
import socket
import subprocess
import sys
import threading
import time

import numpy as np
import psutil


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def publisher(endpoint: str, rate: float, batch: int, go: "mp.synchronize.Event", done: "mp.synchronize.Event",
              out: "mp.Queue") -> None:
    """Binary batches (header JSON + one contiguous column per field) at ``rate`` readings/s until ``done``."""
    import zmq
    ctx = zmq.Context()
    pub = ctx.socket(zmq.PUB)
    pub.setsockopt(zmq.SNDHWM, 100_000)
    pub.bind(endpoint)
    seq = 0
    sent = 0
    period = batch / rate
    next_t = time.perf_counter()
    first_go = None
    t_start = time.time()
    while not done.is_set():
        t = t_start + (seq + np.arange(batch)) / rate
        ne = 5e16 * (1 + 0.02 * np.sin(t))
        te = np.full(batch, 3.0)
        header = json.dumps({"fields": ["t", "ne", "Te"], "n": batch, "seq": seq, "dtype": "<f8"}).encode()
        pub.send_multipart([header, np.concatenate([t, ne, te]).astype("<f8").tobytes()])
        seq += batch
        if go.is_set():
            if first_go is None:
                first_go = seq - batch
            sent += batch
        next_t += period
        delay = next_t - time.perf_counter()
        if delay > 0:
            time.sleep(delay)      # pacing of the publisher process, not synchronisation
    out.put({"sent_after_go": sent, "first_seq_after_go": first_go, "last_seq": seq - 1})
    pub.close(linger=0)
    ctx.term()


def _thread_cpu(native_id: int | None) -> float:
    if native_id is None:
        return float("nan")
    for th in psutil.Process().threads():
        if th.id == native_id:
            return th.user_time + th.system_time
    return float("nan")


def _session(endpoint: str):
    from adapters.zmq_stream import ZmqSource
    from monitor.config import Config
    from monitor.session import Session
    from monitor.tui.feed import EventTap
    tap = EventTap()
    return Session(ZmqSource(endpoint, name="bench"), Config(), sinks=[tap], live=True), tap


def _wait_first_data(session, timeout: float = 10.0) -> None:
    deadline = time.monotonic() + timeout
    while session.summary()["accepted"] == 0:
        if time.monotonic() > deadline:
            raise SystemExit("no data from the publisher")
        time.sleep(0.05)   # polling a counter from the bench's main thread


def run_without_screen(endpoint: str, seconds: float) -> dict:
    session, _tap = _session(endpoint)
    stop = threading.Event()
    ids: dict[str, int] = {}

    def body() -> None:
        ids["pipe"] = threading.get_native_id()
        session.run(stop=stop)

    th = threading.Thread(target=body, daemon=True)
    th.start()
    _wait_first_data(session)
    a0 = session.summary()["accepted"]
    c0 = _thread_cpu(ids.get("pipe"))
    t0 = time.perf_counter()
    time.sleep(seconds)        # measuring window
    elapsed = time.perf_counter() - t0
    s = session.summary()
    c1 = _thread_cpu(ids.get("pipe"))
    stop.set()
    th.join(5)
    session.close()
    return {"accepted_per_s": (s["accepted"] - a0) / elapsed, "lost": s["lost"], "rejected": s["rejected_total"],
            "pipeline_cpu": (c1 - c0) / elapsed, "screen_cpu": 0.0, "refresh_hz": 0.0, "accepted": s["accepted"]}


def run_with_screen(endpoint: str, seconds: float, size: tuple[int, int]) -> dict:
    from monitor.tui.app import RegimeApp
    from monitor.tui.feed import SessionFeed
    from monitor.tui.settings import ScreenSettings
    session, tap = _session(endpoint)
    feed = SessionFeed(session, tap)
    app = RegimeApp(feed, ScreenSettings(title="bench", length=0.3, wave_frequency=2.45e9, refresh_hz=15.0))
    result: dict = {}

    async def main() -> None:
        async with app.run_test(size=size) as pilot:
            deadline = time.monotonic() + 10
            while session.summary()["accepted"] == 0:
                assert time.monotonic() < deadline, "no data"
                await pilot.pause(0.05)
            main_id = threading.main_thread().native_id
            a0, k0 = session.summary()["accepted"], app.ticks
            c_main0, c_pipe0 = _thread_cpu(main_id), _thread_cpu(feed.thread_id)
            t0 = time.perf_counter()
            await pilot.pause(seconds)
            elapsed = time.perf_counter() - t0
            s = session.summary()
            result.update(accepted_per_s=(s["accepted"] - a0) / elapsed, lost=s["lost"], rejected=s["rejected_total"],
                          refresh_hz=(app.ticks - k0) / elapsed,
                          screen_cpu=(_thread_cpu(main_id) - c_main0) / elapsed,
                          pipeline_cpu=(_thread_cpu(feed.thread_id) - c_pipe0) / elapsed, accepted=s["accepted"])
            await pilot.press("q")

    asyncio.run(main())
    session.close()
    return result


FIRST_FRAME = r"""
import time
t0 = time.perf_counter()
# what `regime demo` imports and builds before its first frame
from monitor.commands.demo import envelope_path
from monitor.config import load_config
from monitor.session import Session, make_engine
from monitor.sources import open_source
from monitor.tui.feed import EventTap
from monitor.tui.launch import make_app, settings_for
t_import = time.perf_counter() - t0
config = load_config(envelope_path())
tap = EventTap()
session = Session(open_source("sim:demo?loop=1", config), config, sinks=[tap], engine=make_engine(config))
app = make_app(session, tap, settings_for(config, title="regime demo", bell=False))
tick = app.render_tick
def painted():
    print(f"{t_import:.3f} {time.perf_counter() - t0:.3f}", flush=True)
    app.exit()
state = {"first": True}
def first_tick():
    # the first frame: the first snapshot pushed into the widgets has been painted
    tick()
    if state["first"]:
        state["first"] = False
        app.call_after_refresh(painted)
app.render_tick = first_tick
app.run(headless=True, size=(160, 50))
session.close()
"""


def import_to_first_frame(runs: int = 3) -> list[tuple[float, float, float]]:
    out = []
    for _ in range(runs):
        t0 = time.perf_counter()
        p = subprocess.run([sys.executable, "-c", FIRST_FRAME], capture_output=True, text=True, timeout=60)
        wall = time.perf_counter() - t0
        imp, frame = (float(x) for x in p.stdout.split()[-2:])
        out.append((imp, frame, wall))
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seconds", type=float, default=8.0)
    ap.add_argument("--rate", type=float, default=100_000.0)
    ap.add_argument("--batch", type=int, default=1000)
    args = ap.parse_args()
    endpoint = f"tcp://127.0.0.1:{_free_port()}"
    ctx = mp.get_context("spawn")
    go, done, out = ctx.Event(), ctx.Event(), ctx.Queue()
    proc = ctx.Process(target=publisher, args=(endpoint, args.rate, args.batch, go, done, out), daemon=True)
    proc.start()
    go.set()
    rows = []
    try:
        rows.append(("no screen", run_without_screen(endpoint, args.seconds)))
        rows.append(("screen 160x50", run_with_screen(endpoint, args.seconds, (160, 50))))
        rows.append(("screen 80x24", run_with_screen(endpoint, args.seconds, (80, 24))))
    finally:
        done.set()
        pub = out.get(timeout=10)
        proc.join(10)
    print(f"publisher: {args.rate:,.0f} readings/s in batches of {args.batch} ({pub['last_seq'] + 1:,} sent in all)")
    print(f"{'run':<15}{'accepted/s':>12}{'lost(seq)':>10}{'rejected':>9}{'pipeline CPU':>14}{'screen CPU':>12}{'refresh/s':>11}")
    for name, r in rows:
        print(f"{name:<15}{r['accepted_per_s']:>12,.0f}{r['lost']:>10}{r['rejected']:>9}"
              f"{r['pipeline_cpu']:>13.0%}{r['screen_cpu']:>12.0%}{r['refresh_hz']:>11.1f}")
    base = rows[0][1]["accepted_per_s"]
    for name, r in rows[1:]:
        print(f"ratio accepted/s {name} / no screen: {r['accepted_per_s'] / base:.3f}")
    ff = import_to_first_frame()
    for imp, frame, wall in ff:
        print(f"imports {imp:.3f} s, import-to-first-frame {frame:.3f} s (160x50), whole process {wall:.3f} s")
    print(f"median import-to-first-frame: {sorted(f for _i, f, _w in ff)[len(ff) // 2]:.3f} s (target < 1.5 s)")
    print(f"load average during the run: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")


if __name__ == "__main__":
    main()
