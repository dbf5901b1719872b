"""--alarm-pub on `regime replay` and `regime demo`: a real SUB socket on 127.0.0.1 receives every
alarm event the run printed, in order (the same objects as the --json alarm lines)."""

from __future__ import annotations

import json
import socket
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _run_with_subscriber(args: list[str]) -> tuple[subprocess.CompletedProcess, list[dict]]:
    import zmq

    endpoint = f"tcp://127.0.0.1:{_free_port()}"
    ctx = zmq.Context()
    sub = ctx.socket(zmq.SUB)
    sub.setsockopt(zmq.LINGER, 0)
    sub.setsockopt(zmq.RECONNECT_IVL, 10)       # connect within 10 ms of the bind
    sub.setsockopt(zmq.SUBSCRIBE, b"")
    sub.connect(endpoint)                        # zmq retries until the run binds
    try:
        out = subprocess.run([sys.executable, "-m", "monitor", *args, "--alarm-pub", endpoint],
                             capture_output=True, text=True, timeout=120, cwd=ROOT)
        published = []
        while sub.poll(300):
            published.append(json.loads(sub.recv()))
    finally:
        sub.close()
        ctx.term()
    return out, published


@pytest.mark.parametrize("args", [
    # the argon demo shot at 5x: its first event comes 0.4 s after the bind, time for the subscription
    ["replay", "replay_data/argon_rf_excursion.csv", "--headless", "--json", "--quiet", "--speed", "5"],
    ["demo", "--headless", "--json", "--once", "--speed", "20"],
])
def test_every_printed_alarm_event_is_published(args: list[str]) -> None:
    out, published = _run_with_subscriber(args)
    assert out.returncode == 0, out.stderr
    printed = [json.loads(line) for line in out.stdout.splitlines() if line.startswith('{"type":"alarm"')]
    assert printed, out.stdout[-2000:]
    key = lambda r: (r["alarm"], r["previous"], r["state"], r["time"])  # noqa: E731
    assert [key(r) for r in published] == [key(r) for r in printed]
