"""Headless lines: the status record's keys, NaN as null, alarm counts by state, the printer as a sink, the recorder's status."""

from __future__ import annotations

import dataclasses
import io
import json
import math

import numpy as np

from adapters.base import LinkState, SourceStatus
from monitor.alarms.events import AlarmEvent, AlarmState, Priority
from monitor.model import Frame
from monitor.headless import HeadlessPrinter, human_status, human_summary, jsonable, recorder_record, status_record
from monitor.recording import RecorderStatus
from monitor.snapshot import AlarmView, Snapshot, SourceCounts, Stats


def view(name: str, state: AlarmState) -> AlarmView:
    return AlarmView(alarm=name, state=state, priority=Priority.HIGH, kind="limit", quantity="ne", value=2e17,
                     limit=1.5e17, since=3.0)


def snap() -> Snapshot:
    return Snapshot(
        data_time=12.5, wall_time=1000.0,
        latest={"ne": (1e17, 2e16), "Te": (math.nan, None), "debye_length": (4.0e-5, None)},
        stats={"ne": Stats(10, 1e17, 1e15, 9e16, 1.1e17, 0.0)},
        trail_t=np.array([12.0, 12.5]), trail={"ne": np.array([1e17, 1e17])}, warnings=(),
        sources={"probe": SourceStatus("probe", LinkState.CONNECTED, "ok")},
        counts={"probe": SourceCounts(accepted=10, rejected={"malformed": 2}, lost=1, rate=20.0)},
        alarms=(view("a", AlarmState.UNACKNOWLEDGED), view("b", AlarmState.SUPPRESSED), view("c", AlarmState.NORMAL)),
        discharge_on=True, live=True,
    )


def test_status_record_contract_and_nan_as_null() -> None:
    rec = status_record(snap())
    assert rec["type"] == "status" and rec["time"] == 12.5
    assert (rec["accepted"], rec["rejected"], rec["lost"], rec["rate"]) == (10, {"malformed": 2}, 1, 20.0)
    assert rec["latest"]["Te"] is None and rec["latest"]["ne"] == 1e17
    assert [a["alarm"] for a in rec["alarms"]] == ["a", "b"]
    json.dumps(rec, allow_nan=False)             # strict JSON
    assert jsonable({"x": (np.float64(np.inf), np.int64(3))}) == {"x": [None, 3]}


def test_human_line_counts_alarms_by_what_they_ask_of_the_operator() -> None:
    line = human_status(snap())
    assert line.startswith("[connected]") and "t=12.500" in line
    assert "accepted 10 rejected 2 lost 1" in line
    assert "alarms 1: a(unacknowledged)" in line and "suppressed 1" in line
    assert "Te -- eV" in line and "ne 1e+17 m^-3" in line


def test_printer_writes_one_json_object_per_line() -> None:
    out = io.StringIO()
    p = HeadlessPrinter(out, as_json=True)
    ev = AlarmEvent(time=3.0, wall=1000.0, alarm="a", state=AlarmState.UNACKNOWLEDGED, previous=AlarmState.NORMAL,
                    quantity="ne", value=2e17, limit=1.5e17, priority=Priority.HIGH)
    p.on_alarm(ev)
    p.on_status(SourceStatus("probe", LinkState.DISCONNECTED, "cable", 2))
    p.status(snap())
    p.summary({"type": "summary", "accepted": 10, "rejected": {}, "lost": 0, "x": math.nan})
    recs = [json.loads(line) for line in out.getvalue().splitlines()]
    assert [r["type"] for r in recs] == ["alarm", "source", "status", "summary"]
    # the journal's object, plus the data time as a clock time (null: t = 3 s is not epoch seconds)
    # and as seconds into the run (null: no frame came before the event)
    assert recs[0] == {**json.loads(json.dumps(ev.to_json())), "clock": None, "run_time": None}
    p.on_frame(Frame("probe", np.array([1.7e9, 1.7e9 + 1]), {"ne": np.array([1e17, 1e17])}))
    p.on_alarm(AlarmEvent(time=1.7e9 + 2.5, wall=1000.0, alarm="a", state=AlarmState.ACKNOWLEDGED,
                          previous=AlarmState.UNACKNOWLEDGED, quantity="ne", value=2e17, limit=1.5e17,
                          priority=Priority.HIGH))
    late = json.loads(out.getvalue().splitlines()[-1])
    # 1.7e9 s after 1970-01-01T00:00:00Z is 2023-11-14T22:13:20Z (UTC arithmetic, common practice)
    assert late["clock"] == "2023-11-14T22:13:22.500Z" and late["run_time"] == 2.5
    assert recs[1]["state"] == "disconnected" and recs[1]["retries"] == 2
    assert recs[3]["x"] is None


def recorder(**kw: object) -> RecorderStatus:
    base = dict(ok=True, message="recording shots/shot-0002.csv", file="shots/shot-0002.csv", shots=2,
                rows_written=4500, rows_idle=300, dropped=0, errors=0, split="discharge", rows_pending=20)
    base.update(kw)
    return RecorderStatus(**base)  # type: ignore[arg-type]


def test_status_lines_carry_the_recorder_and_what_it_did_not_record() -> None:
    s = dataclasses.replace(snap(), recorder=recorder())
    rec = status_record(s)["recorder"]
    assert rec == {"ok": True, "complete": True, "message": "recording shots/shot-0002.csv",
                   "file": "shots/shot-0002.csv", "shots": 2, "rows_written": 4500, "rows_pending": 20,
                   "split": "discharge", "outside_shots_not_recorded": 300, "dropped": 0, "errors": 0}
    assert "recorded 4,500 (outside shots: 300 not recorded)" in human_status(s)
    assert "recorder" not in status_record(snap())               # no recorder, no key
    every = dataclasses.replace(snap(), recorder=recorder(split="none", rows_idle=0))
    assert "outside shots" not in human_status(every)             # split = "none" records them all
    failing = dataclasses.replace(snap(), recorder=recorder(ok=False, message="cannot write x: disk full", dropped=7))
    line = human_status(failing)
    assert "RECORDER DROPPED 7" in line and "RECORDER FAILING: cannot write x: disk full" in line
    assert status_record(failing)["recorder"]["complete"] is False


def test_summary_says_what_was_recorded_and_when_the_recording_is_incomplete() -> None:
    base = {"source": "probe", "accepted": 4800, "rejected": {}, "lost": 0, "state": "ended", "alarm_events": 1}
    text = human_summary({**base, "recorder": recorder_record(recorder())})
    assert "  recorder: shots 2, readings written 4,500, outside shots: 300 not recorded, dropped 0, " \
           "write errors 0" in text.splitlines()
    assert "INCOMPLETE" not in text
    lost = human_summary({**base, "recorder": recorder_record(recorder(ok=False, message="disk full", dropped=12,
                                                                       errors=3))})
    assert "  RECORDING INCOMPLETE: 12 readings of shots did not reach the disk; disk full" in lost.splitlines()
    assert "recorder" not in human_summary(base)
