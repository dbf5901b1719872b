"""Shot splitting by the discharge state (the one rule of monitor.alarms.discharge), with margins, one file per shot."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from monitor.config import load_config
from monitor.recording import Recorder, RecordingOptions
from monitor.alarms.discharge import DischargeDetector
from monitor.recording.shots import Action, ShotSplitter

from recording_helpers import data_rows, frame

ON, OFF = 1e17, 1e13


def test_discharge_state_carries_over_unknown_density() -> None:
    det = DischargeDetector(1e15, deadband=0.1)
    assert det.on is None                                   # nothing judged yet
    ne = np.array([np.nan, 2e15, np.nan, 1e14, np.nan])
    assert det.step(np.arange(5.0), ne).tolist() == [False, True, True, False, False]
    assert det.step(np.array([5.0]), np.array([np.nan])).tolist() == [False]
    det.step(np.array([6.0]), np.array([2e15]))
    assert det.step(np.array([7.0]), np.array([np.nan])).tolist() == [True]


def test_the_splitter_follows_the_frames_discharge_state() -> None:
    # the pipeline's answer wins over the density (one rule for the alarms and the shots)
    sp = ShotSplitter(on_above=1e15, post=0.0)
    acts = sp.feed(np.arange(3) * 0.1, np.array([False, True, True]), np.array([ON, ON, ON]))
    assert acts == [Action("idle", 0, 1), Action("open", 1), Action("rows", 1, 3)]


def test_splitter_actions_for_an_on_off_sequence() -> None:
    sp = ShotSplitter(on_above=1e15, post=0.25)
    t = np.arange(10) * 0.1
    ne = np.array([OFF, OFF, ON, ON, OFF, OFF, OFF, OFF, ON, OFF])
    acts = sp.feed(t, None, ne)
    # off at t=0.4: rows up to t <= 0.65 stay in the shot, t=0.7 closes it, then idle until t=0.8 triggers
    assert acts == [Action("idle", 0, 2), Action("open", 2), Action("rows", 2, 4), Action("rows", 4, 7),
                    Action("close", 7), Action("idle", 7, 8), Action("open", 8), Action("rows", 8, 9),
                    Action("rows", 9, 10)]
    assert sp.in_shot and sp.off_since == 0.9


def test_discharge_back_within_the_post_margin_is_the_same_shot() -> None:
    sp = ShotSplitter(on_above=1e15, post=1.0)
    t = np.arange(6) * 0.1
    acts = sp.feed(t, None, np.array([ON, OFF, OFF, ON, ON, OFF]))
    assert [a.kind for a in acts].count("open") == 1 and "close" not in [a.kind for a in acts]


def test_close_across_frames_and_split_none() -> None:
    sp = ShotSplitter(on_above=1e15, post=0.5)
    sp.feed(np.array([0.0, 0.1]), None, np.array([ON, OFF]))
    assert sp.feed(np.array([0.3, 0.7]), None, np.array([OFF, OFF])) == [Action("rows", 0, 1), Action("close", 1),
                                                                    Action("idle", 1, 2)]
    none = ShotSplitter(on_above=1e15, post=0.5, split="none")
    assert none.feed(np.array([0.0]), None, np.array([OFF])) == [Action("open", 0), Action("rows", 0, 1)]


def test_recorder_writes_one_file_per_shot_with_margins(tmp_path: Path) -> None:
    rec = Recorder(tmp_path, load_config(None), source_name="s",
                   options=RecordingOptions(pre_trigger=0.3, post_trigger=0.5))
    t = np.round(np.arange(0, 12, 0.1), 10)
    ne = np.full(len(t), OFF)
    ne[(t >= 2.0) & (t < 4.0)] = ON          # shot 1: 2.0 - 4.0
    ne[(t >= 8.0) & (t < 9.0)] = ON          # shot 2: 8.0 - 9.0
    seq = np.arange(len(t))
    for a in range(0, len(t), 7):             # frames that cut across the edges
        rec.on_frame(frame(t[a:a + 7], ne=ne[a:a + 7], seq=seq[a:a + 7]))
    rec.close()
    files = sorted(tmp_path.glob("shot-*.csv"))
    assert [f.name[:9] for f in files] == ["shot-0001", "shot-0002"]
    times = [[float(r.split(",")[0]) for r in data_rows(f)] for f in files]
    # pre margin 0.3 s before the trigger, post margin: up to 0.5 s after the first sample off
    assert times[0][0] == 1.7 and times[0][-1] == 4.5
    assert times[1][0] == 7.7 and times[1][-1] == 9.5
    assert len(times[0]) == 29 and len(times[1]) == 19          # every sample in between, none twice
    st = rec.status()
    assert st.shots == 2 and st.rows_written == 48 and st.rows_idle == len(t) - 48 and st.dropped == 0


def test_priming_rows_carry_the_held_reading_into_a_new_shot(tmp_path: Path) -> None:
    rec = Recorder(tmp_path, load_config(None), source_name="s",
                   options=RecordingOptions(pre_trigger=0.0, post_trigger=0.5))
    te = np.array([2.0, 3.0, np.nan, np.nan])
    # Te read at t=0.1 is still held (default hold 0.25 s) at the first row of the shot, t=0.3
    rec.on_frame(frame([0.0, 0.1, 0.2, 0.3], ne=[OFF, OFF, OFF, ON], Te=te, seq=np.arange(4)))
    rec.close()
    (f,) = tmp_path.glob("shot-*.csv")
    assert "# primed: 1 rows" in f.read_text()
    assert data_rows(f) == ["0.1,nan,10000000000000.0,3.0", "0.3,3,1e+17,nan"]
