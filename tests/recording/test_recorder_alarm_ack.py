"""The recorder's health is the engine's recorder:write alarm, like the others for the operator: listed,
counted as active, shelved and acknowledged by the one state machine (ISA-18.2: unacknowledged ->
acknowledged -> normal on return). A real EFBIG from the file-size limit, in a subprocess."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from recording_helpers import ROOT, env

SCRIPT = r"""
import json, resource, signal, sys
import numpy as np
from monitor.config import load_config
from monitor.model import Frame
from monitor.recording import Recorder, RecordingOptions
from monitor.session import Session, make_engine
from monitor.sources import open_source

signal.signal(signal.SIGXFSZ, signal.SIG_IGN)            # the write then fails with EFBIG
config = load_config(None)
ticks = iter(range(10**9))
clock = lambda: 1000.0 + 0.3 * next(ticks)                # every frame is due for writing at once
rec = Recorder(sys.argv[1], config, source_name="s", options=RecordingOptions(split="none"), clock=clock)
session = Session(open_source("sim:steady", config), config, engine=make_engine(config), live=True, recorder=rec)

def feed(a):
    i = np.arange(a, a + 250)
    vals = {"ne": np.full(250, 5e16) + i, "Te": np.full(250, 3.0)}
    rec.on_frame(Frame("s", i * 1e-3, vals, seq=i, raw=vals))

def ours():
    return [(v.alarm, v.state.value, v.description[:40]) for v in session.snapshot().alarms
            if v.alarm == "recorder:write" and v.state.value != "normal"]

hard = resource.getrlimit(resource.RLIMIT_FSIZE)[1]
resource.setrlimit(resource.RLIMIT_FSIZE, (60_000, hard))
a = 0
while rec.status().ok and a < 20_000:
    feed(a); a += 250
session.check_conditions()                                # as every step of the run does
res = {"failing": ours(), "active": session.summary()["alarms_active"]}
res["shelved"] = [e.state.value for e in session.shelve("recorder:write", 600.0)]
session.unshelve("recorder:write")
session.acknowledge(None)                                 # the operator's acknowledge-all
res["acked"] = ours()
resource.setrlimit(resource.RLIMIT_FSIZE, (hard, hard))   # space again
for _ in range(12):
    feed(a); a += 250
session.check_conditions()
res["after"] = ours()
res["active_after"] = session.summary()["alarms_active"]
res["events"] = [(e.alarm, e.previous.value, e.state.value, e.action) for e in session.recent_events
                 if e.alarm == "recorder:write"]
res["ok_after"] = rec.status().ok
rec.close()
print(json.dumps(res))
"""


def test_the_recorders_alarm_is_listed_acknowledged_and_returns_to_normal(tmp_path: Path) -> None:
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(tmp_path / "rec")], capture_output=True, text=True,
                         timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    res = json.loads(out.stdout.splitlines()[-1])
    # listed in the alarm list and counted as active while it fails
    assert [(a, s) for a, s, _ in res["failing"]] == [("recorder:write", "unacknowledged")]
    assert "cannot write" in res["failing"][0][2]
    assert "recorder:write" in res["active"]
    assert res["shelved"] == ["shelved"]                  # the engine's shelving, as for any alarm
    assert [(a, s) for a, s, _ in res["acked"]] == [("recorder:write", "acknowledged")]
    # ISA-18.2 (common practice): an acknowledged alarm whose condition clears goes to normal
    assert res["ok_after"] is True and res["after"] == [] and "recorder:write" not in res["active_after"]
    assert res["events"] == [
        ["recorder:write", "normal", "unacknowledged", None],
        ["recorder:write", "unacknowledged", "shelved", "shelve"],
        ["recorder:write", "shelved", "unacknowledged", "unshelve"],
        ["recorder:write", "unacknowledged", "acknowledged", "acknowledge"],
        ["recorder:write", "acknowledged", "normal", None],
    ]
