"""Benchmark of the screen against its budgets, all measured side by side in one run and printed as ratios.

Run: python tests/bench/bench_screen.py [--seconds 8] [--rate 100000] [--presses 20] [--launches 3]

1. First number: wall time from launching a fresh interpreter to the first painted frame that shows a
   reading, for the demo's screen at 160x50 and 80x24, beside a minimal Textual app with one label
   launched the same way (budgets: 1.0 s, and at most 3x the minimal app).
2. CPU: a ZeroMQ publisher (own process) sends 100k readings/s; the same ingestion without the screen
   and with it at 160x50 and 80x24: accepted and lost (by seq), the pipeline thread's CPU, the screen
   thread's CPU (share of one core; budget 20 % at 160x50) and the refreshes per second.
3. Keys: under the pilot, while ingesting, the time from a key press to its effect in the widgets
   (acknowledge, shelve, units) and to the app's exit (quit); p99 budget 100 ms, quit 0.5 s.
4. The demo at 1x (simulated source at 1 kHz, the screen at 160x50 under run_test): the whole
   process's CPU and the screen thread's, over --seconds (budget 25 % of a core in all).
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

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)


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


ALARMS = 24

KEY_CONFIG = "\n".join(["[discharge]", 'on_above = "1e14m^-3"', ""] + [
    f'[[limit]]\nname = "ne_over_{i:02d}"\nquantity = "ne"\nhigh = "{1e15 * (1 + i):.3g}m^-3"\npriority = "high"\n'
    for i in range(ALARMS)])
"""Limits the publisher's density (5e16 m^-3) always exceeds: alarms to acknowledge and shelve."""


def _session(endpoint: str, config_path: str | None = None):
    from adapters.zmq_stream import ZmqSource
    from monitor.config import Config, load_config
    from monitor.session import Session, make_engine
    from monitor.tui.feed import EventTap
    tap = EventTap()
    if config_path is None:
        return Session(ZmqSource(endpoint, name="bench"), Config(), sinks=[tap], live=True), tap
    config = load_config(config_path)
    return Session(ZmqSource(endpoint, name="bench"), config, sinks=[tap], engine=make_engine(config), live=True), tap


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


MINIMAL_APP = r"""
import sys, time
from textual.app import App
from textual.widgets import Label
class One(App):
    def compose(self):
        yield Label("1.70e11 cm-3")
    def on_mount(self):
        self.call_after_refresh(self.painted)
    def painted(self):
        print(f"{time.time():.6f}", flush=True)
        self.exit()
w, h = (int(x) for x in sys.argv[1].split("x"))
One().run(headless=True, size=(w, h))
"""

DEMO_FIRST_NUMBER = r"""
import sys, time
# what `regime demo` (monitor.commands.demo.run) imports and builds before its first frame
from monitor.commands.demo import envelope_path
from monitor.config import load_config
from monitor.session import Session, make_engine
from monitor.sources import open_source
from monitor.tui.feed import EventTap
from monitor.tui.launch import make_app, settings_for
config = load_config(envelope_path())
tap = EventTap()
session = Session(open_source("sim:demo?seed=0&speed=1&loop=1", config), config, sinks=[tap],
                  engine=make_engine(config), live=True)
app = make_app(session, tap, settings_for(config, title="regime demo", bell=False))
tick = app.render_tick
state = {"done": False}
def painted():
    print(f"{time.time():.6f}", flush=True)
    app.exit()
def first_number():
    tick()
    snap = app.watch_screen.last
    # the first frame whose snapshot holds a density, reported once the refresh after it has run
    if not state["done"] and snap is not None and "ne" in snap.latest:
        state["done"] = True
        app.call_after_refresh(painted)
app.render_tick = first_number
w, h = (int(x) for x in sys.argv[1].split("x"))
app.run(headless=True, size=(w, h))
session.close()
"""


def launch_to_paint(script: str, size: str) -> float:
    """Seconds from starting a fresh interpreter to the paint the script reports (wall clock on both sides)."""
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(filter(None, [ROOT, os.environ.get("PYTHONPATH")]))}
    t0 = time.time()
    p = subprocess.run([sys.executable, "-c", script, size], capture_output=True, text=True, timeout=60, env=env)
    if p.returncode != 0 or not p.stdout.strip():
        raise SystemExit(f"first-frame script failed: {p.stderr[-2000:]}")
    return float(p.stdout.split()[-1]) - t0


def first_numbers(runs: int) -> dict[str, list[float]]:
    """Interleaved launches, so that the machine's state touches every variant alike."""
    out: dict[str, list[float]] = {}
    for _ in range(runs):
        for size in ("160x50", "80x24"):
            out.setdefault(f"minimal {size}", []).append(launch_to_paint(MINIMAL_APP, size))
            out.setdefault(f"demo {size}", []).append(launch_to_paint(DEMO_FIRST_NUMBER, size))
    return out


def key_latencies(endpoint: str, presses: int, config_path: str) -> dict[str, list[float]]:
    """Key press to effect painted, in seconds, on the real app (run_test, 160x50) while the publisher runs.

    A key goes in as the terminal driver hands it over (``driver.send_message``); the clock stops when
    the effect is in the widgets and the screen has been refreshed after it. (``pilot.press`` itself
    waits for the whole process to fall idle, which never happens while a pipeline thread ingests, so
    it would time the pilot, not the screen.)"""
    from textual import events
    from monitor.alarms.events import AlarmState
    from monitor.tui.app import RegimeApp
    from monitor.tui.feed import SessionFeed
    from monitor.tui.screens.shelve import ShelveDialog
    from monitor.tui.settings import ScreenSettings
    from monitor.tui.widgets.alarm_list import AlarmList
    from monitor.tui.widgets.readings import Readings
    session, tap = _session(endpoint, config_path)
    feed = SessionFeed(session, tap)
    app = RegimeApp(feed, ScreenSettings(title="bench", length=0.3, wave_frequency=2.45e9, refresh_hz=15.0))
    out: dict[str, list[float]] = {"acknowledge": [], "shelve (z: dialog)": [], "shelve (1: shelved)": [],
                                   "units": [], "quit": []}

    def state(name: str | None) -> AlarmState | None:
        rows = app.watch_screen.query_one(AlarmList).rows()
        return next((a.state for a in rows if a.alarm == name), None)

    async def until(condition) -> None:
        deadline = time.monotonic() + 10
        while not condition():
            if time.monotonic() > deadline:
                raise SystemExit("a key had no effect within 10 s")
            await asyncio.sleep(0.001)

    async def press(key: str, effect) -> float:
        painted = asyncio.Event()
        t0 = time.perf_counter()
        app._driver.send_message(events.Key(key, key if len(key) == 1 else None))
        await until(effect)
        app.call_after_refresh(painted.set)
        await asyncio.wait_for(painted.wait(), 10)
        return time.perf_counter() - t0

    quit_at = {"t": 0.0}

    async def main() -> None:
        async with app.run_test(size=(160, 50)):
            await until(lambda: app.watch_screen.is_mounted)
            await until(lambda: sum(a.state == AlarmState.UNACKNOWLEDGED
                                    for a in app.watch_screen.query_one(AlarmList).rows()) >= ALARMS)
            alarms = app.watch_screen.query_one(AlarmList)
            for _ in range(min(presses, ALARMS // 2)):
                # the first row is an unacknowledged alarm (they are listed first): select it, untimed
                await press("home", lambda: alarms.selected == alarms.rows()[0].alarm)
                name = alarms.selected
                assert state(name) == AlarmState.UNACKNOWLEDGED
                out["acknowledge"].append(await press("a", lambda: state(name) == AlarmState.ACKNOWLEDGED))
            for _ in range(min(presses, ALARMS // 2)):
                await press("home", lambda: alarms.selected == alarms.rows()[0].alarm)
                name = alarms.selected
                assert state(name) == AlarmState.UNACKNOWLEDGED
                out["shelve (z: dialog)"].append(await press("z", lambda: isinstance(app.screen, ShelveDialog)))
                # shelved, and the dialog gone (a refresh callback set on a closing dialog would never run)
                out["shelve (1: shelved)"].append(await press("1", lambda: state(name) == AlarmState.SHELVED
                                                              and app.screen is app.watch_screen))
            readings = app.watch_screen.query_one(Readings)
            for i in range(presses):
                want = "m⁻³" if i % 2 == 0 else "cm⁻³"
                out["units"].append(await press("u", lambda: want in str(readings.render())))
            quit_at["t"] = time.perf_counter()
            app._driver.send_message(events.Key("q", "q"))
            await until(lambda: app.stop.is_set())
        out["quit"].append(time.perf_counter() - quit_at["t"])   # the app has shut down here

    asyncio.run(main())
    session.close()
    return out


def demo_cpu(seconds: float) -> dict[str, float]:
    """CPU share of one core of this process and of its screen thread while the demo runs at 1x."""
    from monitor.commands.demo import envelope_path
    from monitor.config import load_config
    from monitor.session import Session, make_engine
    from monitor.sources import open_source
    from monitor.tui.feed import EventTap
    from monitor.tui.launch import make_app, settings_for
    config = load_config(envelope_path())
    tap = EventTap()
    session = Session(open_source("sim:demo?seed=0&speed=1&loop=1", config), config, sinks=[tap],
                      engine=make_engine(config), live=True)
    app = make_app(session, tap, settings_for(config, title="regime demo", bell=False))
    out: dict[str, float] = {}

    async def main() -> None:
        async with app.run_test(size=(160, 50)) as pilot:
            await pilot.pause(3.0)               # past start-up: the steady state is measured
            me = psutil.Process()
            c0, m0 = me.cpu_times(), _thread_cpu(threading.main_thread().native_id)
            t0 = time.perf_counter()
            await pilot.pause(seconds)
            dt = time.perf_counter() - t0
            c1, m1 = me.cpu_times(), _thread_cpu(threading.main_thread().native_id)
            out["process"] = (c1.user + c1.system - c0.user - c0.system) / dt
            out["screen"] = (m1 - m0) / dt
            app.stop.set()
            app.exit()

    asyncio.run(main())
    session.close()
    return out


def _p99(values: list[float]) -> float:
    return float(np.percentile(values, 99)) if values else float("nan")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seconds", type=float, default=8.0)
    ap.add_argument("--rate", type=float, default=100_000.0)
    ap.add_argument("--batch", type=int, default=1000)
    ap.add_argument("--presses", type=int, default=20)
    ap.add_argument("--launches", type=int, default=3)
    args = ap.parse_args()

    ff = first_numbers(args.launches)
    print("first number on screen, launch of a fresh interpreter to the painted frame (median of "
          f"{args.launches}, interleaved):")
    med = {k: float(np.median(v)) for k, v in ff.items()}
    for size in ("160x50", "80x24"):
        demo, minimal = med[f"demo {size}"], med[f"minimal {size}"]
        print(f"  {size}: demo {demo:.3f} s, one-label Textual app {minimal:.3f} s; demo / one-label = "
              f"{demo / minimal:.2f} (budget 3); demo / 1.0 s budget = {demo:.2f}")

    endpoint = f"tcp://127.0.0.1:{_free_port()}"
    ctx = mp.get_context("spawn")
    go, done, out = ctx.Event(), ctx.Event(), ctx.Queue()
    proc = ctx.Process(target=publisher, args=(endpoint, args.rate, args.batch, go, done, out), daemon=True)
    proc.start()
    go.set()
    rows = []
    import tempfile
    with tempfile.NamedTemporaryFile("w", suffix=".toml", delete=False) as f:
        f.write(KEY_CONFIG)
    try:
        rows.append(("no screen", run_without_screen(endpoint, args.seconds)))
        rows.append(("screen 160x50", run_with_screen(endpoint, args.seconds, (160, 50))))
        rows.append(("screen 80x24", run_with_screen(endpoint, args.seconds, (80, 24))))
        keys = key_latencies(endpoint, args.presses, f.name)
    finally:
        done.set()
        pub = out.get(timeout=10)
        proc.join(10)
        os.unlink(f.name)
    print(f"publisher: {args.rate:,.0f} readings/s in batches of {args.batch} ({pub['last_seq'] + 1:,} sent in all)")
    print(f"{'run':<15}{'accepted/s':>12}{'lost(seq)':>10}{'rejected':>9}{'pipeline CPU':>14}{'screen CPU':>12}{'refresh/s':>11}")
    for name, r in rows:
        print(f"{name:<15}{r['accepted_per_s']:>12,.0f}{r['lost']:>10}{r['rejected']:>9}"
              f"{r['pipeline_cpu']:>13.0%}{r['screen_cpu']:>12.0%}{r['refresh_hz']:>11.1f}")
    base = rows[0][1]["accepted_per_s"]
    for name, r in rows[1:]:
        print(f"ratio accepted/s {name} / no screen: {r['accepted_per_s'] / base:.3f}; "
              f"screen CPU / 20 % budget: {r['screen_cpu'] / 0.20:.2f}")
    print(f"keys while ingesting {args.rate:,.0f} readings/s (pilot, 160x50), press to effect:")
    for name, values in keys.items():
        budget = 0.5 if name == "quit" else 0.1
        print(f"  {name:<20} n={len(values):>3}  median {np.median(values) * 1e3:6.1f} ms  p99 {_p99(values) * 1e3:6.1f} ms"
              f"  p99 / {budget * 1e3:.0f} ms budget = {_p99(values) / budget:.2f}")
    demo = demo_cpu(args.seconds)
    print(f"demo at 1x, 160x50: process {demo['process']:.0%} of a core (screen thread {demo['screen']:.0%}); "
          f"process / 25 % budget = {demo['process'] / 0.25:.2f}")
    print(f"load average during the run: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")


if __name__ == "__main__":
    main()
