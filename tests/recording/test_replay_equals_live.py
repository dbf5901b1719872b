"""A shot recorded by a real `regime watch` subprocess replays to the same alarm journal (alarm, state, data time)."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import numpy as np

from monitor.recording.csvformat import read_info

from recording_helpers import REGIME, ROOT, data_rows, env


def _alarms(lines: list[str]) -> list[tuple[str, str, float]]:
    out = []
    for line in lines:
        d = json.loads(line)
        if d.get("type") == "alarm":
            out.append((d["alarm"], d["state"], d["time"]))
    return out


def _watch_and_replay(tmp_path: Path, envelope: Path, source: str, *extra: str) -> tuple[list, list, list, Path]:
    rec = tmp_path / "rec"
    live = subprocess.run([*REGIME, "watch", source, "--config", str(envelope), "--record", str(rec),
                           "--headless", "--json", *extra], capture_output=True, text=True, timeout=300,
                          cwd=ROOT, env=env())
    assert live.returncode == 0, live.stderr
    shots = sorted(rec.glob("shot-*.csv"))
    assert len(shots) == 1, shots
    shot = shots[0]
    replay = subprocess.run([*REGIME, "replay", str(shot), "--headless", "--json", "--speed", "max", "--quiet"],
                            capture_output=True, text=True, timeout=300, cwd=ROOT, env=env())
    assert replay.returncode == 0, replay.stderr
    journal = (rec / (shot.name[:-4] + ".alarms.jsonl")).read_text().splitlines()
    return _alarms(live.stdout.splitlines()), _alarms(replay.stdout.splitlines()), _alarms(journal), shot


def test_simulated_excursion_replays_to_the_live_journal(tmp_path: Path) -> None:
    envelope = ROOT / "monitor" / "demo" / "envelope.toml"
    live, replayed, journal, shot = _watch_and_replay(tmp_path, envelope, "sim:excursion?speed=max&rate=1000&seed=3")
    t = np.array([float(r.split(",", 1)[0]) for r in data_rows(shot)])
    in_shot = [e for e in live if t[0] <= e[2] <= t[-1]]
    assert len(in_shot) >= 10
    assert {e[1] for e in in_shot} >= {"unacknowledged", "normal"}      # the excursion raised and cleared alarms
    assert replayed == in_shot
    assert journal == in_shot                                            # the journal written beside the shot
    assert read_info(shot).source.startswith("sim:excursion")


def test_envelope_in_force_comes_from_the_recording(tmp_path: Path, envelope: Path) -> None:
    live, replayed, journal, shot = _watch_and_replay(tmp_path, envelope, "sim:excursion?speed=max&rate=500&seed=1")
    assert replayed == journal and any(e[0] == "ne_high" and e[1] == "unacknowledged" for e in replayed)
    # the same replay with the envelope given again agrees with the embedded one
    again = subprocess.run([*REGIME, "replay", str(shot), "--config", str(envelope), "--headless", "--json",
                            "--quiet"], capture_output=True, text=True, timeout=300, cwd=ROOT, env=env())
    assert _alarms(again.stdout.splitlines()) == replayed


def test_a_forward_seek_over_the_excursion_still_replays_to_the_live_journal(tmp_path: Path) -> None:
    from adapters.csv_file import CsvSource
    from monitor.alarms.journal import JournalSink, read_journal
    from monitor.recording.replaying import open_file
    from monitor.session import Session, make_engine

    envelope = ROOT / "monitor" / "demo" / "envelope.toml"
    live, _, _, shot = _watch_and_replay(tmp_path, envelope, "sim:excursion?speed=max&rate=1000&seed=3")
    t = np.array([float(r.split(",", 1)[0]) for r in data_rows(shot)])
    in_shot = [e for e in live if t[0] <= e[2] <= t[-1]]
    raised = [e for e in in_shot if e[1] == "unacknowledged"]
    assert raised
    # replay in this process, and seek from before the first raise to past the last event of the shot
    opened = open_file(shot, speed=None)                  # the config embedded in the shot
    opened.source.close()
    journal = JournalSink(tmp_path / "seeked.alarms.jsonl", append=False)
    source = CsvSource(shot, batch_rows=100)              # 0.1 s of 1 kHz data a step
    session = Session(source, opened.config, [journal], engine=make_engine(opened.config), live=False)
    session.open()
    while (session.now() or t[0]) < raised[0][2] - 1.0:
        assert session.step(0.0)
    assert session.now() < raised[0][2] and in_shot[-1][2] + 0.5 < t[-1]
    assert session.seek(in_shot[-1][2] + 0.5)
    session.run()
    session.close()
    assert [(d["alarm"], d["state"], d["time"]) for d in read_journal(journal.path)] == in_shot
