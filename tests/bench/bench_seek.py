"""Benchmark: a forward seek over 10 minutes of 1 kHz data beside a straight full-speed replay of the same.

Run: python tests/bench/bench_seek.py [--minutes 10] [--rounds 2]
A forward seek plays the skipped stretch through the pipeline and the alarm engine, so it should cost
about what a straight replay of that stretch costs (ratio near 1) and yield the same alarm events.
Also: with the session in a worker thread, as on the screen, how long another thread waits for a turn.
Prints figures measured side by side in one run; no assertion is timed.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from adapters.csv_file import CsvSource  # noqa: E402
from monitor.config import load_config  # noqa: E402
from monitor.session import Session, make_engine  # noqa: E402

RATE = 1000.0
START = 1767261600.0          # an epoch data time, as recordings carry


def write_shot(path: Path, minutes: float) -> None:
    """An invented steady shot with one 30 s density excursion at 200-230 s."""
    n = int((minutes + 1) * 60 * RATE)
    rng = np.random.default_rng(1)
    t = START + np.arange(n) / RATE
    ne = 5e16 * (1 + 0.02 * rng.standard_normal(n))
    ne[(t - START > 200) & (t - START < 230)] = 2.5e17
    te = 3.0 + 0.05 * rng.standard_normal(n)
    p0 = np.full(n, 1.3)
    with open(path, "w") as fh:
        fh.write("t,seq,ne,Te,p0,sigma_ne,sigma_Te,sigma_p0\n")
        tab = np.column_stack([t, np.arange(n), ne, te, p0, 0.2 * ne, 0.3 + 0 * te, 0.01 + 0 * p0])
        np.savetxt(fh, tab, fmt=["%.3f", "%d", "%.6g", "%.4g", "%.3g", "%.3g", "%.3g", "%.3g"], delimiter=",")


class Frozen:
    """A wall clock that never moves: the paced (1x) replay releases nothing by itself."""

    def __call__(self) -> float:
        return 0.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--minutes", type=float, default=10.0, help="length of the stretch sought over")
    parser.add_argument("--rounds", type=int, default=2)
    args = parser.parse_args()
    span = args.minutes * 60.0
    config = load_config(ROOT / "monitor" / "demo" / "envelope.toml")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "long.csv"
        write_shot(path, args.minutes)
        print(f"shot: {path.stat().st_size / 1e6:.1f} MB, {args.minutes:g} min at {RATE:g} Hz sought over")

        def session(speed: float | None) -> Session:
            s = Session(CsvSource(path, speed=speed, clock=Frozen()), config, [], engine=make_engine(config),
                        live=False)
            s.open()
            return s

        for _ in range(args.rounds):
            s = session(None)
            t0 = time.perf_counter()
            first = s.replay_position().start
            while s.replay_position().time < first + span and s.step(0.0):
                pass
            straight = time.perf_counter() - t0
            ev_straight = s.summary()["alarm_events"]
            s.close()

            s = session(1.0)
            s.step(0.0)
            t0 = time.perf_counter()
            answer = s.seek(first + span)
            t_call = time.perf_counter() - t0
            steps = 0
            while s.source.catching_up:      # the position stands at the target at once; the data follows
                s.step(0.0)
                steps += 1
            fwd = time.perf_counter() - t0
            summ = s.summary()
            s.close()
            print(f"straight replay at max: {straight:.2f} s ({ev_straight} alarm events) | forward seek: "
                  f"{fwd:.2f} s (seek call {t_call * 1e3:.2f} ms, answer {answer!r}, {steps} polls, "
                  f"{summ['accepted']} readings, {summ['alarm_events']} alarm events) | RATIO seek/straight "
                  f"{fwd / straight:.2f}")

        s = session(1.0)
        s.step(0.0)
        first = s.replay_position().start
        stop = threading.Event()
        worker = threading.Thread(target=lambda: s.run(stop=stop, timeout=0.01))
        worker.start()
        t0 = time.perf_counter()
        s.seek(first + span)
        gaps, last = [], time.perf_counter()
        while s.source.catching_up:
            time.sleep(0.01)
            now = time.perf_counter()
            gaps.append(now - last)
            last = now
        fwd = time.perf_counter() - t0
        stop.set()
        worker.join()
        s.close()
        late = np.array(gaps) - 0.01
        print(f"session in a worker thread: forward seek {fwd:.2f} s; a 10 ms sleep loop beside it overslept "
              f"median {np.median(late) * 1e3:.1f} ms, max {late.max() * 1e3:.1f} ms over {late.size} turns")


if __name__ == "__main__":
    main()
