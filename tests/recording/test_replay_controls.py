"""Replay controls through the session (as the screen uses them): seek back and forth, pause, step, speed."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from adapters.csv_file import CsvSource
from monitor.config import load_config
from monitor.report.build import Collector
from monitor.session import Session


class Clock:
    def __init__(self) -> None:
        self.now = 0.0

    def __call__(self) -> float:
        return self.now


def _file(tmp_path: Path) -> Path:
    t = np.arange(3000) * 0.01
    p = tmp_path / "shot.csv"
    p.write_text("t,seq,ne,Te\n" + "".join(f"{float(x)!r},{i},5e16,3.0\n" for i, x in enumerate(t)))
    return p


def test_seek_back_replays_again_without_rejections(tmp_path: Path) -> None:
    src = CsvSource(_file(tmp_path), chunk=8192)
    col = Collector()
    session = Session(src, load_config(None), [col], live=False)
    session.open()
    while col.n < 1500:
        assert session.step(0.0)
    assert session.seek(2.0)
    seen = col.n
    session.step(0.0)
    t, _, _ = col.arrays()
    assert abs(t[seen] - 2.0) < 1e-9                          # continues from t = 2.0
    session.run()
    summary = session.summary()
    assert summary["rejected"] == {}                           # time going back after a seek is not refused
    pos = session.replay_position()
    assert pos.time == pos.end and abs(pos.end - 29.99) < 1e-9


def test_pause_step_and_speed_through_the_session(tmp_path: Path) -> None:
    clock = Clock()
    src = CsvSource(_file(tmp_path), speed=1.0, clock=clock, step_seconds=0.1)
    col = Collector()
    session = Session(src, load_config(None), [col], live=False)
    session.open()
    session.step(0.0)
    assert col.n == 1                                          # only t = 0 is due at 1x
    clock.now = 1.0
    session.step(0.0)
    assert col.n == 101                                        # one second of data time at 1x
    session.pause()
    clock.now = 50.0
    session.step(0.0)
    assert col.n == 101 and session.replay_position().paused
    session.step_replay()
    session.step(0.0)
    assert col.n == 111                                        # one step: 0.1 s of data time
    session.set_speed(4.0)
    session.resume()
    clock.now = 51.0
    session.step(0.0)
    t, _, _ = col.arrays()
    assert abs(t[-1] - (1.1 + 4.0)) <= 0.0100001               # 1 s wall at x4 = 4 s of data after t = 1.1
    assert session.replay_position().speed == 4.0


def test_progress_goes_to_stderr_not_into_the_json(tmp_path: Path) -> None:
    import json
    import subprocess

    from recording_helpers import REGIME, ROOT, env

    p = tmp_path / "slow.csv"
    p.write_text("t,ne,Te\n" + "".join(f"{i * 0.05!r},5e16,3.0\n" for i in range(70)))     # 3.45 s of data
    out = subprocess.run([*REGIME, "replay", str(p), "--speed", "1", "--headless", "--json"], capture_output=True,
                         text=True, timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    records = [json.loads(line) for line in out.stdout.splitlines()]       # every stdout line is JSON
    assert records[-1]["type"] == "summary" and records[-1]["accepted"] == 70
    assert any(r["type"] == "status" for r in records)
    progress = [line for line in out.stderr.splitlines() if line.startswith("regime replay:")]
    assert progress and "%" in progress[0] and "readings" in progress[0]
