"""The command line as other tools meet it: a reader that closes the pipe early gets no traceback."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_report_json_into_a_closed_pipe_is_quiet() -> None:
    shot = next((ROOT / "replay_data").glob("*.csv"))
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "report", str(shot), "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=ROOT)
    assert proc.stdout is not None
    proc.stdout.close()          # the reader has left before the first write (as `| head` does once satisfied)
    _, err = proc.communicate(timeout=120)
    assert b"Traceback" not in err, err.decode()
    assert proc.returncode == 0
