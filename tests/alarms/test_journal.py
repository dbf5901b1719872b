"""The JSON Lines journal: every transition and operator action, with data and wall time, flushed."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from alarm_helpers import engine, frame
from monitor.alarms.journal import JournalSink, read_journal

REQUIRED = {"type", "time", "wall", "alarm", "quantity", "value", "limit", "state", "previous", "priority",
            "kind", "action"}


def test_journal_has_every_transition_and_action_and_is_readable_while_open(tmp_path: Path) -> None:
    path = tmp_path / "shot" / "alarms.jsonl"
    sink = JournalSink(path)
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "latch": True, "priority": "urgent"}])
    t = np.arange(0, 300) * 0.01
    events = eng.process(frame(t, Te=np.where((t >= 1.0) & (t < 2.0), 9.0, 3.0)))
    events += eng.reset("hot", 3.0)
    events += eng.acknowledge("hot", 3.1)
    events += eng.shelve("hot", 30.0, 3.2)
    events += eng.unshelve("hot", 3.3)
    events += eng.reset("hot", 3.4)
    for e in events:
        sink.on_alarm(e)
    lines = path.read_text(encoding="utf-8").splitlines()      # flushed: readable before close
    assert len(lines) == len(events) == sink.written
    rows = [json.loads(x) for x in lines]
    assert all(REQUIRED <= set(r) for r in rows)
    hot = [(r["time"], r["state"], r["action"]) for r in rows if r["alarm"] == "hot"]
    assert hot == [(0.0, "normal", None), (1.0, "unacknowledged", None), (3.0, "unacknowledged", "reset_refused"),
                   (3.1, "acknowledged", "acknowledge"), (3.2, "shelved", "shelve"),
                   (3.3, "acknowledged", "unshelve"), (3.4, "normal", "reset")]
    raised = next(r for r in rows if r["alarm"] == "hot" and r["state"] == "unacknowledged")
    assert (raised["quantity"], raised["value"], raised["limit"], raised["priority"]) == ("Te", 9.0, 5.0, "urgent")
    assert all(r["wall"] >= 1000.0 for r in rows)
    sink.close()
    assert read_journal(path) == rows


def test_journal_appends_and_skips_a_torn_last_line(tmp_path: Path) -> None:
    path = tmp_path / "j.jsonl"
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    events = eng.process(frame([0.0, 1.0], Te=[3.0, 9.0]))
    for _ in range(2):
        sink = JournalSink(path)
        for e in events:
            sink.on_alarm(e)
        sink.close()
    with open(path, "a", encoding="utf-8") as fh:
        fh.write('{"type": "alarm", "ti')
    assert len(read_journal(path)) == 2 * len(events)


def test_journal_counts_a_write_failure_instead_of_raising(tmp_path: Path) -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    (event, *_) = eng.process(frame([0.0, 1.0], Te=[3.0, 9.0]))
    sink = JournalSink(tmp_path / "j.jsonl")
    sink.close()
    sink.path = tmp_path / "missing-dir" / "x" / "j.jsonl"   # reopening there fails
    sink.on_alarm(event)
    assert sink.errors == 1 and sink.written == 0 and "FileNotFoundError" in (sink.last_error or "")


def test_non_finite_values_are_written_as_null(tmp_path: Path) -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    events = eng.process(frame([0.0, 1.0], Te=[np.nan, 9.0]))
    sink = JournalSink(tmp_path / "j.jsonl")
    for e in events:
        sink.on_alarm(e)
    sink.close()
    rows = read_journal(tmp_path / "j.jsonl")
    assert rows[0]["value"] is None and rows[-1]["value"] == 9.0


_HELD_BACK = r"""
import json, resource, signal, sys
from monitor.alarms.events import AlarmEvent, AlarmState, Priority
from monitor.alarms.journal import JournalSink

signal.signal(signal.SIGXFSZ, signal.SIG_IGN)            # a write past the limit fails with EFBIG
said = []
sink = JournalSink(sys.argv[1], warn=said.append)
def event(i):
    return AlarmEvent(time=float(i), wall=0.0, alarm="ne_high", state=AlarmState.UNACKNOWLEDGED,
                      previous=AlarmState.NORMAL, quantity="ne", value=1e17, limit=1.5e17, priority=Priority.HIGH)
hard = resource.getrlimit(resource.RLIMIT_FSIZE)[1]
sink.on_alarm(event(0))                                    # fits
resource.setrlimit(resource.RLIMIT_FSIZE, (300, hard))   # the disk is full now
sink.on_alarm(event(1))
sink.on_alarm(event(2))
resource.setrlimit(resource.RLIMIT_FSIZE, (hard, hard))   # room again
sink.on_alarm(event(3))
sink.close()
print(json.dumps({"written": sink.written, "failed": sink.failed, "errors": sink.errors, "said": said}))
"""


def test_events_held_in_the_buffer_by_a_full_disk_are_written_late_not_called_lost(tmp_path: Path) -> None:
    import subprocess
    import sys

    path = tmp_path / "j.jsonl"
    out = subprocess.run([sys.executable, "-c", _HELD_BACK, str(path)], capture_output=True, text=True, timeout=60,
                         cwd=Path(__file__).resolve().parents[2])
    assert out.returncode == 0, out.stderr
    res = json.loads(out.stdout.splitlines()[-1])
    lines = path.read_text().splitlines()
    assert [json.loads(x)["time"] for x in lines] == [0.0, 1.0, 2.0, 3.0]   # every event reached the file
    assert res["written"] == 4 and res["failed"] == 0 and res["errors"] >= 1
    assert any("cannot write" in x for x in res["said"])
    assert not any("not written" in x for x in res["said"]), res["said"]
