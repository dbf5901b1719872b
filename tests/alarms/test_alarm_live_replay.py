"""A scripted ramp through a limit gives exactly the standard's events, on time, live over ZeroMQ and on replay."""

from __future__ import annotations

import json
import threading
import time
from pathlib import Path

import numpy as np
import pytest

import zmq
from adapters.csv_file import CsvSource  # noqa: E402
from adapters.zmq_stream import ZmqSource  # noqa: E402
from monitor.alarms.engine import AlarmEngine  # noqa: E402
from monitor.config import parse_config  # noqa: E402
from monitor.session import Session  # noqa: E402

# Te = 1 eV + 1 eV/s up to 9 eV at t = 8 s, then down at 1 eV/s; high = 5 eV, deadband 5 %,
# on_delay 0.2 s, off_delay 0.1 s, 100 readings/s. Exceeded (strictly) from the reading at 4.01 s ->
# raised at 4.21 s; back under 4.75 eV (17 - t < 4.75) from 12.26 s -> returned at 12.36 s.
T = np.arange(0, 1400) / 100.0
TE = 1.0 + np.minimum(T, 8.0) - np.maximum(T - 8.0, 0.0)
EXPECTED = [(0.0, "suppressed", "normal"), (4.21, "normal", "unacknowledged"),
            (12.36, "unacknowledged", "returned_unacknowledged")]
CONFIG = {"discharge": {"on_above": 1e15},
          "limit": [{"name": "ramp", "quantity": "Te", "high": 5.0, "deadband": 0.05, "on_delay": 0.2,
                     "off_delay": 0.1}]}


class _Collect:
    def __init__(self) -> None:
        self.events: list = []
        self.frames = threading.Event()
        self.done = threading.Event()

    def on_frame(self, frame) -> None:
        self.frames.set()

    def on_rejections(self, rejections) -> None:
        pass

    def on_status(self, status) -> None:
        pass

    def on_alarm(self, event) -> None:
        self.events.append(event)
        if event.alarm == "ramp" and event.state.value == "returned_unacknowledged":
            self.done.set()

    def close(self) -> None:
        pass

    def ramp(self) -> list[tuple[float, str, str]]:
        return [(round(e.time, 6), e.previous.value, e.state.value) for e in self.events if e.alarm == "ramp"]


def _publish(pub, t: np.ndarray, ne: np.ndarray, te: np.ndarray, seq: int) -> None:
    header = json.dumps({"fields": ["t", "ne", "Te"], "n": len(t), "seq": seq, "dtype": "<f8"}).encode()
    pub.send_multipart([header, np.concatenate((t, ne, te)).astype("<f8").tobytes()])


def test_ramp_live_over_zeromq() -> None:
    config = parse_config(CONFIG, None)
    sink = _Collect()
    pub = zmq.Context.instance().socket(zmq.PUB)
    pub.setsockopt(zmq.SNDHWM, 0)
    pub.bind("tcp://127.0.0.1:*")
    endpoint = pub.getsockopt_string(zmq.LAST_ENDPOINT)
    session = Session(ZmqSource(endpoint, name="probe"), config, [sink], engine=AlarmEngine.from_config(config),
                      live=True)
    stop = threading.Event()

    def feed() -> None:
        k = 0
        while not sink.frames.is_set() and not stop.is_set() and k < 2000:   # warm-up, discharge off
            _publish(pub, np.array([-1.0 + k * 1e-4]), np.array([1e13]), np.array([2.0]), k)
            k += 1
            sink.frames.wait(0.01)
        for a in range(0, len(T), 10):
            _publish(pub, T[a:a + 10], np.full(10, 1e17), TE[a:a + 10], 10_000 + a)

    feeder = threading.Thread(target=feed, daemon=True)
    feeder.start()
    deadline = time.monotonic() + 30.0
    try:
        while not sink.done.is_set() and time.monotonic() < deadline:
            session.step(0.05)
    finally:
        stop.set()
        feeder.join(5.0)
        session.source.close()
        pub.close(linger=0)
    assert sink.ramp() == EXPECTED


def test_ramp_on_replay_of_a_csv_file(tmp_path: Path) -> None:
    path = tmp_path / "ramp.csv"
    rows = "\n".join(f"{t!r},1e17,{te!r}" for t, te in zip(T.tolist(), TE.tolist()))
    path.write_text("t,ne,Te\n" + rows + "\n", encoding="utf-8")
    config = parse_config(CONFIG, None)
    sink = _Collect()
    session = Session(CsvSource(path, speed=None), config, [sink], engine=AlarmEngine.from_config(config),
                      live=False)
    session.run(duration=30.0)
    assert sink.ramp() == EXPECTED
    assert not [e for e in sink.events if e.kind in ("stale", "quality") and e.state.value == "unacknowledged"]
