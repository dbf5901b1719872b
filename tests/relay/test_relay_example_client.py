"""The README's example client of the relay, run as a real subprocess against a real relay: it reads what the owner sent."""

from __future__ import annotations

import os
import subprocess
import sys
import threading
import time
from pathlib import Path

from monitor.relay.publisher import RelayPublisher
from tests.relay.relay_helpers import accepted, demo_session

ROOT = Path(__file__).resolve().parents[2]


def test_the_example_client_reads_readings_alarms_and_states(tmp_path):
    session = demo_session(duration=30.0, rate=500.0)
    pub = RelayPublisher(session, f"ipc://{tmp_path}/relay", interval=0.2)
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-m", "monitor.relay.example_client", pub.endpoint],
                            stdout=subprocess.PIPE, text=True, env=env)
    lines: list[str] = []
    got_state = threading.Event()

    def read() -> None:
        assert proc.stdout is not None
        for line in proc.stdout:
            lines.append(line.split())
            if line.startswith("state"):
                got_state.set()

    reader = threading.Thread(target=read, daemon=True)
    reader.start()
    try:
        assert got_state.wait(20.0), "the client printed no state"
        session.open()
        session.run()
        total = accepted(session)
        deadline = time.monotonic() + 10.0
        while time.monotonic() < deadline:
            data = [x for x in lines if x[0] == "data"]
            if data and int(data[-1][2]) == total:
                break
            time.sleep(0.02)
        data = [x for x in lines if x[0] == "data"]
        assert int(data[-1][2]) == total == 15000
        assert {x[1] for x in data} == {pub.run}
        assert float(data[-1][4]) == session.snapshot().latest["ne"][0]
        assert float(data[-1][6]) == session.snapshot().latest["Te"][0]
        alarms = [(x[1], x[4]) for x in lines if x[0] == "alarm"]
        assert alarms == [(e.alarm, e.state.value) for e in session.recent_events]
        states = [x for x in lines if x[0] == "state"]
        assert states[0][1] == session.name
    finally:
        proc.kill()
        proc.wait(5)
        session.close()
