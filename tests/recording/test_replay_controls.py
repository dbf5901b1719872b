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


# -- a forward seek plays the skipped stretch through the pipeline and the alarm engine ----------------
T0 = 1767261600.0          # recorded shots carry epoch times


def _excursion_shot(tmp_path: Path, rate: float = 200.0) -> Path:
    """30 s at ``rate`` Hz: ne 5e16 m^-3, an excursion to 3e17 from 6 s to 9 s (over ne_high's 1.5e17)."""
    n = int(30 * rate)
    t = T0 + np.arange(n) / rate
    ne = np.where((t - T0 >= 6.0) & (t - T0 < 9.0), 3e17, 5e16)
    p = tmp_path / "excursion.csv"
    p.write_text("t,seq,ne,Te\n" + "".join(f"{float(x)!r},{i},{float(v)!r},3.0\n" for i, (x, v) in
                                           enumerate(zip(t, ne))))
    return p


def _journal_of(tmp_path: Path, envelope: Path, name: str, *, seek: float | None = None, after: float = 2.0,
                paused: bool = False) -> tuple[list[tuple[str, str, float]], dict[str, str]]:
    """Replay the shot into a real journal file: straight, or with a seek to T0 + ``seek`` once data
    time passed T0 + ``after``. The journal's (alarm, state, time) and the alarm states at the seek target."""
    from monitor.alarms.journal import JournalSink, read_journal
    from monitor.session import make_engine

    config = load_config(envelope)
    journal = JournalSink(tmp_path / f"{name}.alarms.jsonl", append=False)
    src = CsvSource(_excursion_shot(tmp_path), chunk=8192, batch_rows=500, clock=Clock())
    session = Session(src, config, [journal], engine=make_engine(config), live=False)
    session.open()
    states: dict[str, str] = {}
    if seek is not None:
        while session.replay_position().time < T0 + after:
            assert session.step(0.0)
        assert session.set_speed(1.0)                              # a clock that stands still: only
        if paused:                                                 # the skipped stretch may flow
            assert session.pause()
        assert session.seek(T0 + seek)
        assert session.replay_position().time == T0 + seek          # where the operator asked to be
        while src.catching_up:                                      # the stretch plays at full speed
            assert session.step(0.0)
        assert session.replay_position().time == T0 + seek
        states = {v.alarm: v.state.value for v in session.engine.views()}
        if paused:
            session.step(0.0)
            assert session.replay_position().time == T0 + seek and session.replay_position().paused
            assert session.resume()
        assert session.set_speed(None)
    session.run()
    session.close()
    return [(d["alarm"], d["state"], d["time"]) for d in read_journal(journal.path)], states


def test_forward_seek_over_an_excursion_journals_its_raise_and_clear(tmp_path: Path, envelope: Path) -> None:
    straight, _ = _journal_of(tmp_path, envelope, "straight")
    raised = [e for e in straight if e[0] == "ne_high" and e[1] == "unacknowledged"]
    # the on-delay of 0.3 s after the excursion starts at 6 s; it ends at 9 s (off-delay 0)
    assert len(raised) == 1 and abs(raised[0][2] - (T0 + 6.3)) < 0.011
    assert any(e[0] == "ne_high" and e[1] == "returned_unacknowledged" and abs(e[2] - (T0 + 9.0)) < 0.011
               for e in straight)
    seeked, _ = _journal_of(tmp_path, envelope, "seeked", seek=20.0)
    assert seeked == straight                                   # the skipped stretch's alarms, at their data time


def test_forward_seek_into_an_excursion_leaves_the_states_of_a_straight_replay(tmp_path: Path,
                                                                               envelope: Path) -> None:
    straight, _ = _journal_of(tmp_path, envelope, "straight")
    seeked, states = _journal_of(tmp_path, envelope, "seeked", seek=7.5, paused=True)
    assert states["ne_high"] == "unacknowledged"               # raised at 6.3 s inside the skipped stretch
    assert seeked == straight


def test_seek_back_plays_the_stretch_again_as_before(tmp_path: Path, envelope: Path) -> None:
    straight, _ = _journal_of(tmp_path, envelope, "straight")
    back, _ = _journal_of(tmp_path, envelope, "back", seek=1.0, after=12.0)
    # unchanged by the forward seek: back from 12 s to 1 s, the excursion (6-9 s) plays a second time;
    # the states were kept (ne_high returned unacknowledged), its timing starts over, so it is raised
    # and returns again at the same data times, and the journal holds both passes
    assert back == straight + [e for e in straight if e[2] >= T0 + 1.0]
    assert [e[1] for e in back if e[0] == "ne_high"][-2:] == ["unacknowledged", "returned_unacknowledged"]
