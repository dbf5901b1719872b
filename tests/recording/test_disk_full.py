"""A disk that refuses writes (a real EFBIG from the file-size limit) is loud, keeps whole lines, drops nothing silently."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np

from recording_helpers import ROOT, env

SCRIPT = r"""
import json, resource, signal, sys
import numpy as np
from monitor.config import load_config
from monitor.model import Frame
from monitor.recording import Recorder, RecordingOptions

signal.signal(signal.SIGXFSZ, signal.SIG_IGN)            # the write then fails with EFBIG
out = sys.argv[1]
ticks = iter(range(10**9))
clock = lambda: 1000.0 + 0.3 * next(ticks)                # every frame is due for writing at once
rec = Recorder(out, load_config(None), source_name="s", options=RecordingOptions(split="none"), clock=clock)
resource.setrlimit(resource.RLIMIT_FSIZE, (60_000, 60_000))
fed = 0
for a in range(0, 5000, 250):
    i = np.arange(a, a + 250)
    vals = {"ne": np.full(250, 5e16) + i, "Te": np.full(250, 3.0)}
    rec.on_frame(Frame("s", i * 1e-3, vals, seq=i, raw=vals))
    fed += 250
st = rec.status()
rec.close()
end = rec.status()
print(json.dumps({"fed": fed, "ok": st.ok, "message": st.message, "written": end.rows_written,
                  "dropped": end.dropped}))
"""


def test_write_refused_is_loud_whole_lines_and_counted(tmp_path: Path) -> None:
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(tmp_path / "rec")], capture_output=True, text=True,
                         timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    import json

    res = json.loads(out.stdout.splitlines()[-1])
    assert res["ok"] is False and "cannot write" in res["message"]
    assert "regime recorder: cannot write" in out.stderr                 # loud on stderr
    # (the session raises the engine's recorder:write alarm from this status: test_recorder_alarm_ack)
    assert res["written"] + res["dropped"] == res["fed"] and res["dropped"] > 0   # nothing lost silently
    (csv,) = (tmp_path / "rec").glob("shot-*.csv")
    raw = csv.read_bytes()
    assert len(raw) <= 60_000 and raw.endswith(b"\n")                    # cut back to the last whole line
    rows = np.loadtxt(csv, delimiter=",", comments="#", skiprows=1, ndmin=2)
    assert len(rows) == res["written"] and np.all(np.diff(rows[:, 1]) == 1)
